import sys

from roomconv.cli import main

sys.exit(main())
