"""``python -m explorer``: the command line."""

import sys

try:
    from explorer.cli import main
except KeyboardInterrupt:  # Ctrl-C while the libraries load: no traceback either
    print("error: interrupted", file=sys.stderr)
    sys.exit(130)

sys.exit(main())
