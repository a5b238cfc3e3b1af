"""``python -m service [serve] [--host H] [--port P] [--workers N]``."""

import sys

from service.cli import main

if __name__ == "__main__":
    sys.exit(main())
