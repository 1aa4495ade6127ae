"""``python -m calcbuilder.cli``."""

import sys

from . import main

sys.exit(main())
