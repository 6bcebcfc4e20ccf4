"""The selection correction of one group of objects, with every parameter-free quantity precomputed.

A group is a set of catalogue rows sharing one structure of effective black-hole-mass cuts ("i",
"o", "ii", "io" or "oo": intrinsic / observed, see `selection.compiled`). `GroupTerms` holds the
group's thresholds, probit widths, observed masses and mass errors, and what follows from them
alone (e.g. m_err² + w² of an observed cut, m_obs - m_lim of an intrinsic one), so a likelihood
evaluation only does the arithmetic that depends on the parameters (docs/method.md#selection).
`BoundCorrection` is the correction of a whole catalogue bound to its data once: the model computes
latent means and variances on the corrected rows only (`rows`) and calls it for every parameter
vector, or, when the latent mass is affine in per-walker coefficients (the model's forward model)
and the compiled loops are built, hands over only those coefficients (`from_coefficients`): the
loops then compute the latent mass object by object, without (walkers x objects) arrays.

The arithmetic is written so that each element is computed in the same order as the direct
evaluation of `SelectionSet.log_correction` (identical results, bit for bit).
"""

import numpy as np

from . import kernels
from .probit import log_phi, log_upper_orthant


def pick(value, rows):
    """`value` restricted to `rows` on its last axis (scalars and length-1 axes pass through)."""
    value = np.asarray(value, dtype=float)
    if isinstance(rows, slice) or value.ndim == 0 or value.shape[-1] == 1:
        return value
    return value.take(rows, axis=-1)


def _buffer(*arrays):
    """An empty array of the inputs' broadcast shape (quick when every shape is a suffix of the first)."""
    first = np.shape(arrays[0])
    shapes = [np.shape(a) for a in arrays[1:]]
    if all(shape == first[len(first) - len(shape):] for shape in shapes):
        return np.empty(first)
    return np.empty(np.broadcast_shapes(first, *shapes))


class GroupTerms:
    """(log numerator factor, log normaliser) of one group at given latent means and variances.

    Parameters
    ----------
    kind : str, the group's cut structure
    lim, w2 : tuples of arrays (one per cut): thresholds (log10 Msun) and probit widths² (dex²),
        on the group's rows
    m_obs : array or float, observed log M_BH of the group's rows (log10 Msun; 0 when only the
        normaliser is wanted)
    e2 : array or float, squared mass errors (dex²)
    """

    def __init__(self, kind, lim, w2, m_obs, e2):
        self.kind, self.lim, self.w2, self.m_obs, self.e2 = kind, lim, w2, m_obs, e2
        if kind == "o":
            self.spread_free = e2 + w2[0]
        if kind == "i":
            self.obs_above = m_obs - 0.0 - lim[0]  # (m_obs - delta - l) at delta = 0
        self._compiled = None

    @property
    def compiled(self):
        """The compiled loops' per-object arrays (`kernels.PerObject`, built on first use; the
        likelihood's whole-group terms only), or None when the kernels are not available."""
        if self._compiled is None and kernels.AVAILABLE:
            lim, w2 = self.lim, self.w2
            if self.kind == "o":
                per_object = (lim[0], self.spread_free)
            elif self.kind == "i":
                per_object = (lim[0], w2[0], self.m_obs, self.e2)
            else:  # two cuts
                per_object = (*lim, *w2, self.m_obs, self.e2)
            self._compiled = kernels.PerObject(per_object, np.shape(lim[0])[-1])
        return self._compiled if kernels.AVAILABLE else None

    def write(self, mu, delta, var, out):
        """out[...] = num - norm (see __call__); `out` holds the group's rows on its contiguous last
        axis. One compiled pass when the kernels are built (two cuts: while every correlation is
        below 0.925), numpy otherwise."""
        if kernels.usable(mu, delta, var, out_shape=out.shape):
            source, _keep = kernels.arrays(mu, delta, var)
            if self.write_from(source, out):
                return out
        num, norm = self(mu, delta, var)
        np.subtract(num, norm, out=out)
        return out

    def write_from(self, source, out):
        """out[...] = num - norm by the compiled loops reading a `kernels` source (2-d `out` of the
        group's rows); False when they decline (two cuts with a correlation >= 0.925)."""
        if self.kind == "o":
            kernels.cut_observed(source, self.compiled, out)
        elif self.kind == "i":
            kernels.cut_intrinsic(source, self.compiled, True, out)
        else:
            return kernels.two_cuts(self.kind, source, self.compiled, out)
        return True

    def __call__(self, mu, delta, var, numerator=True):
        """Parameters: mu (latent mean, log10 Msun), delta (method offset, dex, or 0.0), var
        (latent variance, dex²), objects on the last axis; numerator False skips the numerator
        (returned as 0). Returns (num, norm), arrays of the broadcast shape (num may be 0.0)."""
        kind, lim, w2, e2 = self.kind, self.lim, self.w2, self.e2
        if kind == "o":
            spread = np.add(var, self.spread_free, out=_buffer(mu, delta, var, e2, lim[0]))
            np.sqrt(spread, out=spread)
            return 0.0, log_phi(np.divide(mu + (delta - lim[0]), spread, out=spread), overwrite_input=True)
        if kind == "i":
            return self._single_intrinsic(mu, delta, var, numerator)
        if kind == "oo":
            var1, var2 = var + e2 + w2[0], var + e2 + w2[1]
            rho = (var + e2) / np.sqrt(var1 * var2)
            centre = mu + delta
            return 0.0, _log_upper_orthant((lim[0] - centre) / np.sqrt(var1),
                                           (lim[1] - centre) / np.sqrt(var2), rho)
        num = 0.0
        if numerator:
            total = var + e2
            v = var * e2 / total
            mu_p = (mu * e2 + (self.m_obs - delta) * var) / total
            if kind == "ii":
                num = _orthant(mu_p, v, lim, w2)
            else:  # "io": one intrinsic cut in the numerator
                num = log_phi((mu_p - lim[0]) / np.sqrt(v + w2[0]))
        if kind == "ii":
            return num, _orthant(mu, var, lim, w2)
        var1, var2 = var + w2[0], var + e2 + w2[1]  # "io": intrinsic first, observed second
        rho = var / np.sqrt(var1 * var2)
        return num, _log_upper_orthant((lim[0] - mu) / np.sqrt(var1),
                                       (lim[1] - mu - delta) / np.sqrt(var2), rho)

    def _single_intrinsic(self, mu, delta, var, numerator):
        """One intrinsic cut: (log Φ((mu_p - l)/sqrt(v + w²)), log Φ((mu - l)/sqrt(var + w²))).

        mu_p = (mu e² + (m_obs - delta) var)/T and v = var e²/T with T = var + e², rearranged as
        ((mu - l) e² + (m_obs - delta - l) var) / sqrt(T (var e² + w² T)); written with in-place
        operations because allocating (n_walkers, N) temporaries costs as much as the arithmetic.
        """
        lim, w2, e2 = self.lim[0], self.w2[0], self.e2
        above = np.subtract(mu, lim, out=_buffer(mu, delta, var, self.m_obs, e2, lim))
        total = np.add(var, e2, out=np.empty_like(above))
        num = 0.0
        if numerator:
            spread = np.multiply(total, w2, out=np.empty_like(above))
            spread += var * e2
            spread *= total
            np.sqrt(spread, out=spread)
            arg = np.multiply(above, e2, out=total)
            obs_above = self.obs_above if np.ndim(delta) == 0 and delta == 0.0 else self.m_obs - delta - lim
            arg += obs_above * var
            arg /= spread
            num = log_phi(arg, overwrite_input=True)
            total = spread
        np.add(var, w2, out=total)
        np.sqrt(total, out=total)
        above /= total
        return num, log_phi(above, overwrite_input=True)


def _orthant(centre, var, lim, w2):
    """log P(two probit cuts on one variable ~ N(centre, var))."""
    var1, var2 = var + w2[0], var + w2[1]
    rho = var / np.sqrt(var1 * var2)
    return _log_upper_orthant((lim[0] - centre) / np.sqrt(var1), (lim[1] - centre) / np.sqrt(var2), rho)


def _log_upper_orthant(h, k, rho):
    """probit.log_upper_orthant, with its rho < 0.925 branch compiled when the kernels are built."""
    return log_upper_orthant(h, k, rho, independent=kernels.orthant_independent if kernels.AVAILABLE else None)


class BoundCorrection:
    """The selection correction of one catalogue, bound to its observed masses and errors.

    Large calls (many walkers x objects) are evaluated in blocks of columns of at most
    _BLOCK_ELEMENTS elements: the temporaries then stay in the cache and in the heap allocator's
    reused memory (fresh multi-page temporaries cost page faults that exceed the arithmetic).

    Parameters
    ----------
    groups : the selection set's groups; m_obs, m_err : arrays (n_rows,), log10 Msun and dex
    latent : dict, optional, per-object features of the affine latent mass on every catalogue row:
        s, x, e (arrays (n_rows,)) and sig2_at, off_at, host_at (int arrays or None); see
        `kernels.Affine`

    Attributes
    ----------
    rows : ndarray of int, the catalogue rows with a black-hole-mass cut, group after group; the
        arrays passed to a call hold these rows (in this order) on their last axis
    """

    def __init__(self, groups, m_obs, m_err, n_rows, latent=None):
        parts, rows, start, affine = [], [], 0, []
        for group in groups:
            index = np.arange(n_rows) if isinstance(group.rows, slice) else np.asarray(group.rows)
            lim, w2 = group.lim, group.w2
            m_obs_g, e2 = pick(m_obs, group.rows), pick(m_err, group.rows) ** 2
            if np.any(index[1:] < index[:-1]):  # catalogue order, so a group of every row needs no scatter
                order = np.argsort(index, kind="stable")
                index, lim, w2 = index[order], tuple(a[order] for a in lim), tuple(a[order] for a in w2)
                m_obs_g, e2 = (_cut(a, order) for a in (m_obs_g, e2))
            blocks = []
            for first in range(0, len(index), _BLOCK_COLUMNS):
                cut = slice(first, first + _BLOCK_COLUMNS)
                blocks.append((slice(start + first, start + min(first + _BLOCK_COLUMNS, len(index))),
                               GroupTerms(group.kind, tuple(a[cut] for a in lim), tuple(a[cut] for a in w2),
                                          _cut(m_obs_g, cut), _cut(e2, cut))))
            parts.append((slice(start, start + len(index)),
                          GroupTerms(group.kind, lim, w2, m_obs_g, e2), blocks))
            if latent is not None:
                affine.append(kernels.Affine(**{key: None if value is None else np.asarray(value)[index]
                                                for key, value in latent.items()}))
            rows.append(index)
            start += len(index)
        self.rows = np.concatenate(rows) if rows else np.zeros(0, dtype=np.intp)
        self._parts = parts
        self._affine = affine if latent is not None else None

    def from_coefficients(self, coef, sig2, off=None, host=None, fallback=None):
        """log correction per object on `rows`, shape (walkers, len(rows)), from the per-walker
        coefficients of the affine latent mass (bit for bit `self(*fallback())`); None when the
        compiled loops are not built or no `latent` features were bound.

        Parameters
        ----------
        coef : ndarray (walkers, 4), C-contiguous: alpha, beta, k_eff, beta² of each walker
        sig2 : ndarray (walkers, n), intrinsic variance per scatter group (dex²)
        off, host : ndarray (walkers, n_labels) or None, method and host-type offsets by label
            (column 0 the zero point)
        fallback : callable returning (mu, delta, var) on `rows`, for a group the loops decline
            (two cuts with a correlation >= 0.925)
        """
        if self._affine is None or not kernels.AVAILABLE:
            return None
        coef, sig2 = np.ascontiguousarray(coef, dtype=float), np.ascontiguousarray(sig2, dtype=float)
        off, host = (None if a is None else np.ascontiguousarray(a, dtype=float) for a in (off, host))
        out = np.empty((len(coef), len(self.rows)))
        arrays = None
        for (cols, terms, _), affine in zip(self._parts, self._affine):
            if not terms.write_from(affine.at(coef, sig2, off, host), out[:, cols]):
                arrays = arrays or fallback()
                mu, delta, var = arrays
                terms.write(mu[..., cols], _columns(delta, cols), var[..., cols], out[:, cols])
        return out

    def __call__(self, mu, delta, var):
        """log correction per object on `rows` (shape of the broadcast inputs, objects last).

        Parameters
        ----------
        mu : ndarray (..., len(rows)), latent mean at the observed epoch (log10 Msun)
        delta : float 0.0 or ndarray like mu, mass-method offset (dex)
        var : ndarray like mu, latent variance (dex²)
        """
        shape = np.broadcast_shapes(np.shape(mu), np.shape(delta), np.shape(var))
        out = np.empty(shape)
        per_column = int(np.prod(shape[:-1]))
        for cols, terms, blocks in self._parts:
            if terms.compiled is not None:  # one pass, no temporaries: no blocks needed
                terms.write(mu[..., cols], _columns(delta, cols), var[..., cols], out[..., cols])
                continue
            pieces = blocks if per_column * (cols.stop - cols.start) > _BLOCK_ELEMENTS else ((cols, terms),)
            for part, part_terms in pieces:
                part_terms.write(mu[..., part], _columns(delta, part), var[..., part], out[..., part])
        return out


#: Blocks of the bound correction: elements above which a call is split, and columns per block
_BLOCK_ELEMENTS = 65536
_BLOCK_COLUMNS = 2048


def _cut(value, cut):
    return value if np.ndim(value) == 0 else value[cut]


def _columns(value, cols):
    return value if np.ndim(value) == 0 else value[..., cols]
