"""``python -m chairbuild`` runs the command line."""

import sys

from chairbuild.cli import main

if __name__ == "__main__":
    sys.exit(main())
