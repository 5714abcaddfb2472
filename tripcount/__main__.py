"""`python -m tripcount` entry point."""

import sys

from tripcount.cli import main

sys.exit(main(sys.argv[1:]))
