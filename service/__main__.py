"""``python -m service [serve] [--host H] [--port P] [--workers N]``."""

import sys

from .cli import main

sys.exit(main())
