"""``python -m phasewise.app``: the command line (same as ``python -m phasewise``)."""

import sys

from phasewise.app.cli import main

if __name__ == "__main__":
    sys.exit(main())
