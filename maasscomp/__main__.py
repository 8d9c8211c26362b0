"""``python -m maasscomp`` runs the command-line interface."""

import sys

from maasscomp.cli import main

if __name__ == "__main__":
    sys.exit(main())
