"""python -m convsim.cli: the command line."""
import sys

from convsim.cli import main

sys.exit(main())
