"""Console entry point: imports the CLI inside a guard, so that Ctrl-C or SIGTERM while
the libraries load ends with one line instead of a traceback."""

import signal
import sys


def main() -> int:
    try:
        from .cli import main as cli_main
    except KeyboardInterrupt:
        print("thermoledger: interrupted while starting", file=sys.stderr)
        return 128 + signal.SIGINT
    return cli_main()


if __name__ == "__main__":
    sys.exit(main())
