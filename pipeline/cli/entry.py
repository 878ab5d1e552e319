"""Console entry point: SIGINT and SIGTERM are held back while the libraries load (an
interrupt inside numpy's import turns into a misleading ImportError, or into a silent exit by
the signal), then delivered to the CLI's own handler: one line, never a traceback; and ignored
once the command has ended, while the interpreter shuts down.

The cyclic garbage collector stays off for the command, and what is left when it ends is
frozen (gc.freeze): a build's stages run with it paused anyway (core.processes.
collector_paused) and make almost no cycles, but the millions of objects a large build holds
until it ends were walked once more when it was turned on again after the build (0.06 s at
10 000 species), and again by the collection of the interpreter's shutdown."""

import gc
import signal
import sys

_STOPS = {signal.SIGINT, signal.SIGTERM}


def main(keep: bool = False) -> int:
    """The console command: libraries load with SIGINT/SIGTERM held back, then the CLI runs;
    returns the exit status. With ``keep``, what the command made is held until the process
    ends (``run``)."""
    old = signal.pthread_sigmask(signal.SIG_BLOCK, _STOPS)
    try:
        from . import main as cli
    except BaseException:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)
        raise
    cli.HELD.keep = keep
    previous = {s: signal.signal(s, cli._on_signal) for s in _STOPS}
    try:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)   # a pending signal arrives here
    except cli.Interrupted as stop:
        print(f"thermoledger: {stop.name} while starting; nothing was done", file=sys.stderr)
        return 128 + stop.signum
    finally:
        for s, handler in previous.items():
            signal.signal(s, handler)
    gc.disable()
    try:
        return cli.main()
    finally:
        # the command has ended and its status is decided: a stop that comes while the
        # interpreter shuts down (which puts its handlers back to the system's, for every
        # thread of the libraries too) would end it with no word and a status saying it
        # was interrupted; ignored, it changes nothing
        for s in _STOPS:
            signal.signal(s, signal.SIG_IGN)
        gc.freeze()           # nothing left to collect: the process ends


def run() -> None:
    """The ``thermoledger`` command: ``main``, then the process ends with its status, what
    it printed flushed, without the interpreter's shutdown: every object the command made is
    still held (a build's result: cli.main.HELD), and freeing them one by one only cost
    time (after a one-edit rebuild of 10 000 species, the process ended 0.08 instead of
    0.11 s after printing its summary). Every file the command wrote is closed, its locks
    released and its helper processes gone by the time ``main`` returns; what is left to
    the shutdown is memory."""
    import os

    status = main(keep=True)
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError):     # a reader that went away, or a closed stream
            pass
    os._exit(status)


if __name__ == "__main__":
    run()
