"""Worker processes that start fresh: forked from a server process (multiprocessing's
"forkserver" method) that imported what they need and holds nothing of the build.

A worker forked from the build's own process shares its pages, and copies each one it
touches (a reference count raised, a freed slot of the heap reused): at 100 000 species the
build held 720 MiB when the report's workers forked, and each worker came to hold some
300 MiB of Pss. Forked from a server instead, they share only the server's imports. The
server costs a new interpreter and its imports once per process (some 0.14 s before the
first two workers of the report answered, against 0.014 s for workers forked from the
asking process).

A process started by multiprocessing's server would first import the ``__main__`` module of
the process that asked for it (as ``__mp_main__``): a script that calls the build without an
``if __name__ == "__main__":`` guard would run again in every worker. These workers are
asked for with ``__main__`` hidden (``FreshProcess``): they need nothing of it.

Their parent is the server, which lives as long as any process it forked holds its pipe
open: a worker watches the process that asked for it instead, and ends when it ends
(``die_with_asker``).
"""

import multiprocessing
import os
import sys
import threading
import types
from multiprocessing import context, forkserver

#: whether this machine has the method (POSIX systems)
AVAILABLE = hasattr(context, "ForkServerContext") and \
    "forkserver" in multiprocessing.get_all_start_methods()

if AVAILABLE:
    class FreshProcess(context.ForkServerProcess):
        """A process forked from the server, told nothing of this process's ``__main__``."""

        @staticmethod
        def _Popen(process_obj):
            from multiprocessing.popen_forkserver import Popen

            main = sys.modules["__main__"]
            sys.modules["__main__"] = types.ModuleType("__main__")   # no spec, no file
            try:
                return Popen(process_obj)
            finally:
                sys.modules["__main__"] = main

    class FreshContext(context.ForkServerContext):
        Process = FreshProcess


def server(modules):
    """The context whose processes are FreshProcess, its server started (once per process:
    it lives as long as this one) with ``modules`` imported; None where the machine has no
    such method or the server cannot be started (workers are then forked as before: they
    cost memory, not results). The server imports while this process goes on."""
    if not AVAILABLE:
        return None
    forkserver.set_forkserver_preload([f"{__package__}.fresh_server", *modules])
    try:
        forkserver.ensure_running()
    except OSError:
        return None
    return FreshContext()


def quiet_start() -> None:
    """Have this process, the server, and those it forks tell a failure to start by their
    exit code alone. multiprocessing's server prints the traceback of a process it forked
    that fails before its work begins, while unpickling what its asker sent it: that fails
    when the asker has let go of its pool meanwhile (a build stopped by Ctrl-C while the
    report's workers start: the pool's locks are gone, and so is the asker by the time the
    traceback would reach its terminal). An asker still there sees the worker gone (a
    broken pool) and says so; errors of the work itself are sent back to it as before."""
    sys.excepthook = _silent


def _silent(kind, value, tb) -> None:
    if not issubclass(kind, Exception):
        sys.__excepthook__(kind, value, tb)


def die_with_asker() -> None:
    """Initializer of a FreshProcess worker: it leaves Ctrl-C to the process that asked for
    it, and a thread of its own ends it (SIGKILL, as workers forked from a build end) as soon
    as that process is gone: the end of multiprocessing's pipe that the asker holds (its
    ``parent_process().sentinel``) then reads as closed."""
    import signal
    from multiprocessing.connection import wait

    signal.signal(signal.SIGINT, signal.SIG_IGN)
    asker = multiprocessing.parent_process()
    if asker is None:
        return

    def watch():
        wait([asker.sentinel])
        os.kill(os.getpid(), signal.SIGKILL)

    threading.Thread(target=watch, daemon=True, name="die-with-asker").start()
