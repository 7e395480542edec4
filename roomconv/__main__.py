"""``python -m roomconv`` runs the command line."""

import sys

from roomconv.cli import main

sys.exit(main())
