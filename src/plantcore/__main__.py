"""``python -m plantcore`` runs the command line."""

import sys

from plantcore.cli import main

sys.exit(main())
