"""`python -m cosmogrow.cli ARGS`: the command line, as the `cosmogrow` script."""

from . import console

console()
