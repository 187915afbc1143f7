"""``python -m scalesieve`` is the same as the ``scalesieve`` command."""

import sys

from scalesieve.cli import main

if __name__ == "__main__":
    sys.exit(main())
