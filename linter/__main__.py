"""``python -m prefit``."""

import sys

from .cli import main

sys.exit(main())
