"""Imported first by the server of core.fresh (its preload), and by no other process: the
processes it forks tell a failure to start by their exit code alone (fresh.quiet_start)."""

from .fresh import quiet_start

quiet_start()
