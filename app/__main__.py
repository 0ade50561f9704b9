"""``python -m app`` runs the same command line as ``upstroke``."""

import sys

from .cli import main

sys.exit(main())
