"""`python -m cosmogrow.cli ARGS`: the command line, as the `cosmogrow` script."""

import sys

from . import main

sys.exit(main())
