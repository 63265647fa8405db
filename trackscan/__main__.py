"""Allow ``python -m trackscan``."""

import sys

from trackscan.cli import main

if __name__ == "__main__":
    sys.exit(main())
