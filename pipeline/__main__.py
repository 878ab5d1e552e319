"""``python -m thermoledger`` runs the command line (as the ``thermoledger`` command does)."""

import sys

from .cli.entry import main

sys.exit(main())
