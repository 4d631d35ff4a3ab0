"""``python -m harbourwatch``."""

import sys

from .cli import main

sys.exit(main())
