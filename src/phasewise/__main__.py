"""``python -m phasewise``: the command line."""

import sys

from phasewise.app.cli import main

if __name__ == "__main__":
    sys.exit(main())
