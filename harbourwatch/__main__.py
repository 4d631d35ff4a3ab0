"""``python -m harbourwatch``."""

import sys

from harbourwatch.cli import main

sys.exit(main())
