"""``python -m explorer``: the command line."""

import sys

from explorer.cli import main

sys.exit(main())
