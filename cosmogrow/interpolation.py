"""Linear interpolation on a uniform grid: an index computation instead of np.interp's binary search.

Used where millions of values are looked up in one smooth table (inverse CDFs of the simulator,
distances of selection thresholds).
"""

import numpy as np


class UniformTable:
    """y(x) tabulated at x = lo + i (hi - lo)/(n - 1); evaluated by linear interpolation.

    Outside [lo, hi] the end cells are extrapolated linearly.

    Parameters
    ----------
    lo, hi : float, grid limits (hi > lo)
    values : array_like (n >= 2,), y on the grid
    """

    def __init__(self, lo, hi, values):
        values = np.asarray(values, dtype=float)
        self.lo = float(lo)
        self.n_cells = len(values) - 1
        self.inv_step = self.n_cells / (float(hi) - self.lo)
        self.start = values[:-1].copy()
        self.slope = np.diff(values)

    def __call__(self, x):
        t = (np.asarray(x, dtype=float) - self.lo) * self.inv_step
        cell = np.clip(t, 0, self.n_cells - 1).astype(np.intp)
        t -= cell
        out = self.slope.take(cell, mode="clip")
        out *= t
        out += self.start.take(cell, mode="clip")
        return out
