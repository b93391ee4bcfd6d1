"""``python -m sweep`` runs the capsweep command line."""

import sys

from sweep.cli import main

sys.exit(main())
