"""``python -m calib``: the command line."""

import sys

from calib.cli.main import main

sys.exit(main())
