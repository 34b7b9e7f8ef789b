"""python -m convsim.cli: the command line."""
import sys

from convsim.cli import main

try:
    sys.exit(main())
except KeyboardInterrupt:       # a second Ctrl-C outside the command's own handler
    sys.stderr.write("convsim: interrupted\n")
    sys.exit(130)
