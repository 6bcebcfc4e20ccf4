"""The command line: `dispatch` reads argv, runs one subcommand and turns errors into one line and
an exit code; `commands/` holds one module per subcommand. The only place that prints or exits.
"""

import os

# The fits here are many small dense problems (L-BFGS-B, 2x2 to 10x10 Hessians) and campaigns
# parallelise over processes: BLAS threads only add overhead and oversubscribe the cores
# (measured: 60 fast fits 9.3 s with OpenBLAS threads, 1.05 s without, on a loaded 2-core machine).
# Set before numpy is first imported by the command line; an explicit user setting wins. Library
# users choose for themselves; campaign workers set it for themselves (campaigns.executors).
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

from .dispatch import console, main  # noqa: E402  (after the environment is set)

__all__ = ["console", "main"]
