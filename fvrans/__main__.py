"""``python -m fvrans``: the command line (see :mod:`fvrans.cli`)."""

import sys

from fvrans.cli import main

sys.exit(main())
