"""``python -m lopside`` runs the same entry point as the ``lopside`` command."""

import sys

from .cli import main

sys.exit(main())
