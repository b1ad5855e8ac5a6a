"""``python -m app``: the same entry point as the ``wellscape`` command."""
import sys

from app.cli import main

if __name__ == "__main__":
    sys.exit(main())
