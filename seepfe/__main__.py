"""``python -m seepfe ...``: the same command line as ``seepfe ...``."""

import sys

from .cli import main

if __name__ == "__main__":
    sys.exit(main())
