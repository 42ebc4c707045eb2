"""``python -m lwrad`` runs the command line."""

import sys

from lwrad.cli import main

sys.exit(main())
