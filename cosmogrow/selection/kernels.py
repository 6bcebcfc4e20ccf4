"""The compiled loops of the selection correction (`_kernels.c`), called through ctypes.

`AVAILABLE` is False when the extension was not built (no C compiler at install time) or when the
environment sets COSMOGROW_NUMPY_SELECTION=1; callers then use their numpy code, which gives the same
numbers (the single-cut terms bit for bit, the orthant to < 1e-12 in log P; tested) more slowly.
Each function takes arrays of any shape that broadcasts to (rows, cols) with objects on the last
axis, and writes into `out` (a float array whose last axis is contiguous).
"""

import ctypes
import importlib.util
import os

import numpy as np

from .probit import _COEF, _GAUSS_LEGENDRE, _LO, _N_CELLS, _ORDERS, _RHO_SWITCH, _STEP

_P, _N = ctypes.c_void_p, ctypes.c_ssize_t
_TABLE = np.ascontiguousarray(_COEF.T)  # (cells, 4): one cell's coefficients side by side
#: Gauss-Legendre nodes on [0, 1] and half weights, per order, kept alive for the library
_RULES = {order: (np.ascontiguousarray(0.5 * (nodes + 1.0)), np.ascontiguousarray(0.5 * weights))
          for order, (nodes, weights) in _GAUSS_LEGENDRE.items()}


def _load():
    if os.environ.get("COSMOGROW_NUMPY_SELECTION") == "1":
        return None
    spec = importlib.util.find_spec(f"{__package__}._kernels")
    if spec is None or not spec.origin or not spec.origin.endswith((".so", ".pyd", ".dylib")):
        return None
    try:
        lib = ctypes.CDLL(spec.origin)
    except OSError:
        return None
    arrays = (_P, _N, _N)
    lib.cg_set_table.argtypes = (_P, _N, ctypes.c_double, ctypes.c_double)
    lib.cg_log_phi.argtypes = (_N, _P, _P)
    lib.cg_cut_observed.argtypes = (_N, _N) + arrays * 3 + (_P, _P, _P, _N)
    lib.cg_cut_intrinsic.argtypes = (_N, _N) + arrays * 3 + (_P,) * 4 + (ctypes.c_int, _P, _N)
    lib.cg_set_rule.argtypes = (ctypes.c_int, ctypes.c_int, _P, _P)
    lib.cg_set_rho_limits.argtypes = (ctypes.c_double, ctypes.c_double)
    lib.cg_orthant_independent.argtypes = (_N, _P, _P, _P, ctypes.c_int, _P)
    lib.cg_two_cuts.argtypes = (ctypes.c_int, _N, _N) + arrays * 3 + (_P,) * 7 + (_N,)
    for name in ("cg_set_table", "cg_log_phi", "cg_cut_observed", "cg_cut_intrinsic", "cg_set_rule",
                 "cg_set_rho_limits"):
        getattr(lib, name).restype = None
    lib.cg_orthant_independent.restype = lib.cg_two_cuts.restype = ctypes.c_int
    lib.cg_set_table(_TABLE.ctypes.data, _N_CELLS, _LO, 1.0 / _STEP)
    for slot, (order, (nodes, half_weights)) in enumerate(sorted(_RULES.items())):
        lib.cg_set_rule(slot, order, nodes.ctypes.data, half_weights.ctypes.data)
    lib.cg_set_rho_limits(_RHO_SWITCH, _ORDERS[0][0])
    return lib


_LIB = _load()
AVAILABLE = _LIB is not None


def _address(a):
    return a.__array_interface__["data"][0]


def _strided(value, keep):
    """(address, row stride, column stride) in elements of a float array of ndim <= 2 broadcast over
    (rows, cols); `keep` holds converted arrays alive until the call returns."""
    a = np.asarray(value, dtype=float)
    if a.ndim == 0:
        a = a.reshape(1)
    keep.append(a)
    item = a.itemsize
    if a.ndim == 1:
        return _address(a), 0, (a.strides[0] // item if a.shape[0] > 1 else 0)
    return (_address(a), a.strides[0] // item if a.shape[0] > 1 else 0,
            a.strides[1] // item if a.shape[1] > 1 else 0)


def _contiguous(value, n):
    return np.ascontiguousarray(np.broadcast_to(np.asarray(value, dtype=float), (n,)))


def _grid(out):
    """(rows, cols, row stride) of an output array of ndim 1 or 2 with a contiguous last axis."""
    if out.ndim == 1:
        return 1, out.shape[0], 0
    return out.shape[0], out.shape[1], out.strides[0] // out.itemsize


def usable(*arrays, out_shape):
    """Whether the compiled path takes these inputs for an output of out_shape: at most 2-d, and
    broadcasting to exactly that shape (the loops read by strides and must not run past an array)."""
    if not AVAILABLE or len(out_shape) > 2 or any(np.ndim(a) > 2 for a in arrays):
        return False
    try:
        return np.broadcast_shapes(out_shape, *(np.shape(a) for a in arrays)) == tuple(out_shape)
    except ValueError:
        return False


def log_phi(x):
    """log Φ(x) of a float array, as `probit.log_phi`."""
    x = np.ascontiguousarray(x, dtype=float)
    out = np.empty_like(x)
    _LIB.cg_log_phi(x.size, _address(x), _address(out))
    return out


class PerObject:
    """Per-object arrays of one group, contiguous, with their addresses taken once."""

    def __init__(self, arrays, n):
        self.arrays = tuple(_contiguous(a, n) for a in arrays)  # kept alive for the addresses
        self.addresses = tuple(_address(a) for a in self.arrays)


def cut_observed(mu, delta, var, per_object, out):
    """out = -log Φ((mu + (delta - lim)) / sqrt(var + spread_free)) (one observed-mass cut);
    per_object: PerObject of (lim, spread_free)."""
    rows, cols, out_r = _grid(out)
    keep = []
    _LIB.cg_cut_observed(rows, cols, *_strided(mu, keep), *_strided(delta, keep), *_strided(var, keep),
                         *per_object.addresses, _address(out), out_r)
    return out


def cut_intrinsic(mu, delta, var, per_object, numerator, out):
    """out = num - log Φ((mu - lim)/sqrt(var + w2)) (one intrinsic-mass cut; see GroupTerms);
    per_object: PerObject of (lim, w2, m_obs, e2)."""
    rows, cols, out_r = _grid(out)
    keep = []
    _LIB.cg_cut_intrinsic(rows, cols, *_strided(mu, keep), *_strided(delta, keep), *_strided(var, keep),
                          *per_object.addresses, int(bool(numerator)), _address(out), out_r)
    return out


def orthant_independent(h, k, rho, log_h, log_k, order):
    """log P(X > h, Y > k) for 1-d arrays with rho < 0.925 (Plackett from rho = 0), clipped to
    Slepian's bounds: the `independent` branch of `probit.log_upper_orthant` (log_h, log_k are
    recomputed inside)."""
    arrays = [np.ascontiguousarray(a, dtype=float) for a in (h, k, rho)]
    out = np.empty(arrays[0].shape)
    if _LIB.cg_orthant_independent(out.size, *(_address(a) for a in arrays), order, _address(out)):
        raise ValueError(f"no compiled Gauss-Legendre rule of order {order}")
    return out


#: kind codes of cg_two_cuts
TWO_CUT_KINDS = {"oo": 0, "io": 1, "ii": 2}


def two_cuts(kind, mu, delta, var, per_object, out):
    """out = log numerator - log normaliser of two cuts per object (kind "oo", "io" or "ii");
    per_object: PerObject of (lim_a, lim_b, w2a, w2b, m_obs, e2). Returns False (out undefined)
    when a correlation reaches 0.925, where the caller's numpy code must be used."""
    rows, cols, out_r = _grid(out)
    keep = []
    status = _LIB.cg_two_cuts(TWO_CUT_KINDS[kind], rows, cols, *_strided(mu, keep), *_strided(delta, keep),
                              *_strided(var, keep), *per_object.addresses, _address(out), out_r)
    return status == 0
