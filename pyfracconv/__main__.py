"""``python -m pyfracconv``: the command line program (see pyfracconv.cli)."""

import sys

from .cli import main

sys.exit(main())
