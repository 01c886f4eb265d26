"""``python -m interkit.cli``."""

import sys

from .main import main

sys.exit(main())
