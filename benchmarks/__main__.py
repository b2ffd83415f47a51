"""``python -m benchmarks``: see benchmarks/__init__.py."""

import sys

from . import main

sys.exit(main())
