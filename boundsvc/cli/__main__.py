"""``python -m boundsvc.cli``."""

import sys

from boundsvc.cli import main

sys.exit(main())
