"""``python -m selfcon ...``: the same as the ``selfcon`` console script."""
import sys

from selfcon.cli import main

if __name__ == "__main__":
    sys.exit(main())
