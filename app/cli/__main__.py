"""``python -m app.cli`` runs the same command line as ``upstroke``."""

import sys

from . import main

sys.exit(main())
