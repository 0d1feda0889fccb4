"""``python -m femcore`` behaves as ``tiltfe``."""

import sys

from .cli import main

sys.exit(main())
