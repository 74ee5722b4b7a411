"""Run the forcefit command: python -m forcefit.cli."""

import sys

from . import main

sys.exit(main())
