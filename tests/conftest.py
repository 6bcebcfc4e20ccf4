"""Test-session settings.

The fits are many small dense problems; BLAS threads only add overhead on a shared 2-core machine
(cosmogrow/__init__.py sets the same default, but pytest may import numpy first).
"""

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
