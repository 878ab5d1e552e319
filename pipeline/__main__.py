"""``python -m thermoledger`` runs the command line (as the ``thermoledger`` command does)."""

from .cli.entry import run

run()
