"""The compiled loops of the selection correction (`_kernels.c`), called through ctypes.

`AVAILABLE` is False when the extension was not built (no C compiler at install time) or when the
environment sets COSMOGROW_NUMPY_SELECTION=1; callers then use their numpy code, which gives the same
numbers (the single-cut terms bit for bit, the orthant to < 1e-12 in log P; tested) more slowly.
Each loop reads the latent mean, offset and variance from a source: `arrays(mu, delta, var)` (any
shapes that broadcast to (rows, cols), objects on the last axis) or an `Affine` source (the model's
affine latent mass computed inside the loop from per-walker coefficients); and writes into `out` (a
float array whose last axis is contiguous).
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


class _Source(ctypes.Structure):
    """cg_source of _kernels.c: three strided arrays, or (coef set) the affine latent model."""

    _fields_ = [("mu", _P), ("delta", _P), ("var", _P), ("mu_r", _N), ("mu_c", _N), ("de_r", _N),
                ("de_c", _N), ("va_r", _N), ("va_c", _N), ("coef", _P), ("coef_r", _N),
                ("sig2", _P), ("sig2_r", _N), ("sig2_at", _P), ("off", _P), ("off_r", _N),
                ("off_at", _P), ("host", _P), ("host_r", _N), ("host_at", _P),
                ("s", _P), ("x", _P), ("e", _P)]


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
    source = ctypes.POINTER(_Source)
    lib.cg_set_table.argtypes = (_P, _N, ctypes.c_double, ctypes.c_double)
    lib.cg_log_phi.argtypes = (_N, _P, _P)
    lib.cg_cut_observed.argtypes = (_N, _N, source, _P, _P, _P, _N)
    lib.cg_cut_intrinsic.argtypes = (_N, _N, source) + (_P,) * 4 + (ctypes.c_int, _P, _N)
    lib.cg_vector_lookup.argtypes = (ctypes.c_int,)
    lib.cg_vector_lookup.restype = ctypes.c_int
    lib.cg_set_rule.argtypes = (ctypes.c_int, ctypes.c_int, _P, _P)
    lib.cg_set_rho_limits.argtypes = (ctypes.c_double, ctypes.c_double)
    lib.cg_orthant_independent.argtypes = (_N, _P, _P, _P, ctypes.c_int, _P)
    lib.cg_two_cuts.argtypes = (ctypes.c_int, _N, _N, source) + (_P,) * 7 + (_N,)
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


def vector_lookup(on=None):
    """Whether log Φ's table lookup uses the hand-written AVX loop (chosen at load time when the
    processor has AVX); `on` False / True switches to the portable loop and back (for tests).
    Both give the same numbers."""
    return bool(_LIB.cg_vector_lookup(-1 if on is None else int(bool(on))))


def log_phi(x):
    """log Φ(x) of a float array, as `probit.log_phi`."""
    x = np.ascontiguousarray(x, dtype=float)
    out = np.empty_like(x)
    _LIB.cg_log_phi(x.size, _address(x), _address(out))
    return out


class PerObject:
    """Per-object arrays of one group, contiguous, with their addresses taken once (and again
    after unpickling, where the arrays live elsewhere)."""

    def __init__(self, arrays, n):
        self.arrays = tuple(_contiguous(a, n) for a in arrays)  # kept alive for the addresses
        self.addresses = tuple(_address(a) for a in self.arrays)

    def __getstate__(self):
        return {"arrays": self.arrays}

    def __setstate__(self, state):
        self.arrays = state["arrays"]
        self.addresses = tuple(_address(a) for a in self.arrays)


def arrays(mu, delta, var):
    """A source reading mu, delta and var from arrays (objects on the last axis, broadcast to the
    output; see `usable`). Returns (source, arrays to keep alive during the call)."""
    keep = []
    source = _Source()
    source.mu, source.mu_r, source.mu_c = _strided(mu, keep)
    source.delta, source.de_r, source.de_c = _strided(delta, keep)
    source.var, source.va_r, source.va_c = _strided(var, keep)
    return source, keep


class Affine:
    """A source computing the latent mass of a group's objects inside the loops (the model's
    affine forward model, docs/method.md#model), per walker r and object j:

        mu = ((alpha_r + beta_r s_j) + host_r[host_at_j]) - k_eff_r x_j
        delta = off_r[off_at_j],   var = sig2_r[sig2_at_j] + beta2_r e_j

    Parameters
    ----------
    s, x, e : arrays (n,), centred host mass (dex), lever arm log10[(1+z)/(1+z_ref)], and the
        squared host-mass error (dex²) of each object
    sig2_at, off_at, host_at : int arrays (n,) or None, each object's column in the per-walker
        tables of intrinsic variances, method offsets and host-type offsets (None: column 0 of
        the variances; no offset)
    """

    def __init__(self, s, x, e, sig2_at=None, off_at=None, host_at=None):
        n = len(s)
        self._features = (tuple(_contiguous(a, n) for a in (s, x, e)),
                          tuple(None if a is None else np.ascontiguousarray(a, dtype=np.int32)
                                for a in (sig2_at, off_at, host_at)))
        if any(a is not None and a.size and a.min() < 0 for a in self._features[1]):
            raise ValueError("Affine: table indexes must be >= 0")
        # the table columns each index needs (a narrower table would be read past its end)
        self._columns = tuple(1 if a is None else int(a.max(initial=0)) + 1 for a in self._features[1])
        self._bind()

    def __getstate__(self):
        return {"_features": self._features}

    def __setstate__(self, state):
        self.__init__(*state["_features"][0], *state["_features"][1])

    def _bind(self):
        (s, x, e), (sig2_at, off_at, host_at) = self._features
        self.source = _Source()
        self.source.s, self.source.x, self.source.e = (_address(a) for a in (s, x, e))
        self.source.sig2_at = None if sig2_at is None else _address(sig2_at)
        self.source.off_at = None if off_at is None else _address(off_at)
        self.source.host_at = None if host_at is None else _address(host_at)
        self.has_offsets, self.has_hosts = off_at is not None, host_at is not None

    def at(self, coef, sig2, off=None, host=None):
        """The source at per-walker values: coef (rows, 4) of (alpha, beta, k_eff, beta²); tables
        sig2 (rows, n_scatter), off and host (rows, n_labels) or None, all C-contiguous float
        arrays (kept alive by the caller during the call). Returns a new source (so that calls from
        several threads do not share one)."""
        rows = len(coef)
        tables = (sig2, off if self.has_offsets else None, host if self.has_hosts else None)
        for a in (coef,) + tables:
            if a is not None and not (a.dtype == np.float64 and a.ndim == 2 and len(a) == rows
                                      and a.flags.c_contiguous):
                raise ValueError("Affine.at: every table must be a C-contiguous float array with one "
                                 "row per walker")
        if coef.shape[1] != 4 or any(a is not None and a.shape[1] < columns
                                     for a, columns in zip(tables, self._columns)):
            raise ValueError("Affine.at: a table has fewer columns than its indexes need")
        source = _Source.from_buffer_copy(self.source)
        source.coef, source.coef_r = _address(coef), coef.strides[0] // 8
        source.sig2, source.sig2_r = _address(sig2), sig2.strides[0] // 8
        if self.has_offsets:
            source.off, source.off_r = _address(off), off.strides[0] // 8
        if self.has_hosts:
            source.host, source.host_r = _address(host), host.strides[0] // 8
        return source


def cut_observed(source, per_object, out):
    """out = -log Φ((mu + (delta - lim)) / sqrt(var + spread_free)) (one observed-mass cut);
    per_object: PerObject of (lim, spread_free)."""
    rows, cols, out_r = _grid(out)
    _LIB.cg_cut_observed(rows, cols, ctypes.byref(source), *per_object.addresses, _address(out), out_r)
    return out


def cut_intrinsic(source, per_object, numerator, out):
    """out = num - log Φ((mu - lim)/sqrt(var + w2)) (one intrinsic-mass cut; see GroupTerms);
    per_object: PerObject of (lim, w2, m_obs, e2)."""
    rows, cols, out_r = _grid(out)
    _LIB.cg_cut_intrinsic(rows, cols, ctypes.byref(source), *per_object.addresses, int(bool(numerator)),
                          _address(out), out_r)
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


def two_cuts(kind, source, per_object, out):
    """out = log numerator - log normaliser of two cuts per object (kind "oo", "io" or "ii");
    per_object: PerObject of (lim_a, lim_b, w2a, w2b, m_obs, e2). Returns False (out undefined)
    when a correlation reaches 0.925, where the caller's numpy code must be used."""
    rows, cols, out_r = _grid(out)
    status = _LIB.cg_two_cuts(TWO_CUT_KINDS[kind], rows, cols, ctypes.byref(source), *per_object.addresses,
                              _address(out), out_r)
    return status == 0
