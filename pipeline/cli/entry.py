"""Console entry point: SIGINT and SIGTERM are held back while the libraries load (an
interrupt inside numpy's import turns into a misleading ImportError, or into a silent exit by
the signal), then delivered to the CLI's own handler: one line, never a traceback; and ignored
once the command has ended, while the interpreter shuts down."""

import signal
import sys

_STOPS = {signal.SIGINT, signal.SIGTERM}


def main() -> int:
    """The console command: libraries load with SIGINT/SIGTERM held back, then the CLI runs;
    returns the exit status."""
    old = signal.pthread_sigmask(signal.SIG_BLOCK, _STOPS)
    try:
        from . import main as cli
    except BaseException:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)
        raise
    previous = {s: signal.signal(s, cli._on_signal) for s in _STOPS}
    try:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)   # a pending signal arrives here
    except cli.Interrupted as stop:
        print(f"thermoledger: {stop.name} while starting; nothing was done", file=sys.stderr)
        return 128 + stop.signum
    finally:
        for s, handler in previous.items():
            signal.signal(s, handler)
    try:
        return cli.main()
    finally:
        # the command has ended and its status is decided: a stop that comes while the
        # interpreter shuts down (which puts its handlers back to the system's, for every
        # thread of the libraries too) would end it with no word and a status saying it
        # was interrupted; ignored, it changes nothing
        for s in _STOPS:
            signal.signal(s, signal.SIG_IGN)


if __name__ == "__main__":
    sys.exit(main())
