"""``python -m scan`` is the same as the ``zetascan`` command."""
import sys

from scan.cli import main

if __name__ == "__main__":
    sys.exit(main())
