"""``python -m femcore`` behaves as ``tiltfe``."""

import sys

from .workflows.cli import main

sys.exit(main())
