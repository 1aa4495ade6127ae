"""``python -m calcbuilder``."""

import sys

from .cli import main

sys.exit(main())
