"""The population model and its posterior (docs/method.md#model), vectorised over walkers and objects.

m_obs,i ~ N(mu_i, V_i),  mu_i = alpha + beta (s_i - s_pivot) - (k - beta gamma) x_i
                                + delta_host(i) + delta_method(i),
V_i = sigma_int^2 + e_m,i^2 + beta^2 e_s,i^2,  x_i = log10[(1 + z_i) / (1 + z_ref)].
The host-type offset shifts the latent black-hole mass (a selection on it sees the shift); the
mass-method offset is a measurement offset of m_obs only.

With a selection set, each object's likelihood is conditioned on its selection (docs/method.md#selection). The model
never validates its input data (the catalogue did) and returns -inf outside the prior.
"""

from dataclasses import dataclass

import numpy as np

from ..errors import ConfigError
from .design import (  # noqa: F401  (re-exported: the design is built with the model)
    Design, build_design, calibrated_hosts, choose_zero_point, choose_zero_point_host_type, lever_arm,
    observed_host_moments)
from .layout import OffsetGroup, ParameterLayout
from .mean import latent_mean
from .moments import (  # noqa: F401  (GaussianMoments re-exported)
    LOG_2PI, GaussianMoments, column as _column, offset_dummies as _offset_dummies, split as _split)

DEFAULT_PRIORS = {
    "k": (-10.0, 10.0),
    "alpha": (0.0, 15.0),
    "beta": (-3.0, 5.0),
    "sigma_int": (0.0, 3.0),
    "f_out": (0.0, 0.5),
    "sigma_out": (0.1, 5.0),
}
# Walker chunks keep temporaries near this many elements (≈ 16 MB per float array).
_CHUNK_ELEMENTS = 2_000_000


class CoupledGrowthModel:
    """Posterior of (k, nuisance parameters) given a catalogue.

    Parameters
    ----------
    design : Design
    options : config.ModelOptions
    priors : dict, optional
        Uniform ranges overriding DEFAULT_PRIORS (keys k, alpha, beta, sigma_int, f_out, sigma_out).
    selection : object with ``log_correction(mu_true, delta, var_lat, m_obs, m_err)``, optional
        A compiled selection set; None or one without selection gives the plain likelihood.
    host_priors : {sample: (mean, variance)}, optional
        The parent host distributions the design was built with (recorded, not used here).
    map_start : array, optional
        A known good starting point for the MAP (e.g. from the parent-host rounds of a fit).

    The model is immutable once built: setting an attribute afterwards raises AttributeError.
    """

    def __init__(self, design: Design, options, priors: dict | None = None, selection=None, *,
                 host_priors: dict | None = None, map_start=None):
        unknown = set(priors or {}) - set(DEFAULT_PRIORS)
        if unknown:
            raise ConfigError(f"priors: unknown parameter {sorted(unknown)[0]!r}; expected one of "
                              f"{', '.join(DEFAULT_PRIORS)}")
        self.design = design
        self.options = options
        self.priors = {**DEFAULT_PRIORS, **(priors or {})}
        self.selection = selection if (selection is not None and selection.has_selection) else None
        self.relation = options.form == "relation"
        self.gamma = float(options.host_growth)
        self._build_layout()
        self._all_rows = _Rows.of(design)
        # the selection correction bound to the data, evaluated on the rows it corrects only
        self._correction = None
        if self.selection is not None and self.selection.corrects_likelihood:
            self._correction = self.selection.bind(design.m_obs, design.m_err, latent=self._features())
            self._corrected_rows = _Rows.of(design, self._correction.rows)
            rows = self._correction.rows
            self._scatter_correction = len(rows) != len(design.m_obs) or bool(np.any(rows[1:] < rows[:-1]))
        self.host_priors = dict(host_priors or {})
        self.map_start = None if map_start is None else np.array(map_start, dtype=float)
        # Without outliers the Gaussian part always goes through weighted moments; a selection
        # then adds only its correction (`_selection_chunk`).
        self._moments = None if options.outliers else GaussianMoments(self)
        self._built = True

    def __setattr__(self, name, value):
        if getattr(self, "_built", False):
            raise AttributeError(f"CoupledGrowthModel is immutable once built; cannot set {name!r}")
        super().__setattr__(name, value)

    # ----- parameter layout -------------------------------------------------------------
    def _build_layout(self):
        d = self.design
        groups = (OffsetGroup("method", d.method_names),)
        widths = [offset_widths(self.options.method_offset_width, d.method_names[1:])]
        if d.host_type_names:
            groups += (OffsetGroup("host_type", d.host_type_names),)
            widths.append(offset_widths(self.options.host_offset_width, d.host_type_names[1:]))
        self.layout = ParameterLayout(relation=self.relation, scatter_names=d.scatter_names,
                                      offset_groups=groups, outliers=bool(self.options.outliers))
        self.lower, self.upper = self.layout.bounds(self.priors)
        self.offset_widths = np.concatenate(widths)
        uniform = np.isfinite(self.lower) & np.isfinite(self.upper)
        self._log_uniform_volume = np.sum(np.log(self.upper[uniform] - self.lower[uniform]))
        self._two_log_widths = 2 * np.log(self.offset_widths)
        self._host_offsets = len(d.host_type_names) > 1
        self._method_offsets = len(self.layout.group("method").free_labels) > 0

    @property
    def names(self) -> tuple:
        """Parameter names in vector order (see `ParameterLayout`)."""
        return self.layout.names

    @property
    def ndim(self) -> int:
        return self.layout.ndim

    @property
    def index_k(self) -> int:
        return self.layout.index_k

    def prior_is_proper_in_k(self) -> bool:
        """Whether the uniform prior on k has finite ends (a Savage-Dickey ratio needs it)."""
        low, high = self.priors["k"]
        return np.isfinite(low) and np.isfinite(high)

    # ----- probability ------------------------------------------------------------------
    def log_prior(self, theta: np.ndarray) -> np.ndarray:
        """Log prior density, shape (n_walkers,); -inf outside the uniform ranges.

        Parameters
        ----------
        theta : ndarray (n_walkers, ndim) or (ndim,), parameter vectors in `layout` order
        """
        theta = np.atleast_2d(theta)
        inside = np.all((theta > self.lower) & (theta < self.upper), axis=1)
        out = np.where(inside, 0.0, -np.inf)
        out = out - self._log_uniform_volume
        offsets = self.layout.offsets
        if offsets.stop > offsets.start:
            z = theta[:, offsets] / self.offset_widths
            out = out - 0.5 * np.sum(z**2 + LOG_2PI + self._two_log_widths, axis=1)
        return out

    def log_likelihood(self, theta: np.ndarray, batches=None) -> np.ndarray:
        """Log likelihood of the data, shape (n_walkers,); `batches`: see `log_prob`."""
        theta = np.atleast_2d(theta)
        n_obj = len(self.design.m_obs)
        rows = max(1, _CHUNK_ELEMENTS // max(n_obj, 1))
        if self._moments is None:
            chunk, batches = self._log_likelihood_chunk, None  # element-wise: rows are independent
        elif self.selection is None:
            chunk = self._moments.log_likelihood
        else:
            chunk = self._selection_chunk
        if len(theta) <= rows:
            return chunk(theta) if batches is None else chunk(theta, batches=batches)
        if batches is not None:
            return np.concatenate([self.log_likelihood(part) for part in _split(theta, batches)])
        return np.concatenate([chunk(theta[i:i + rows]) for i in range(0, len(theta), rows)])

    #: `log_prob` accepts `batches` (several calls stacked into one)
    supports_batches = True

    def log_prob(self, theta: np.ndarray, batches=None) -> np.ndarray:
        """Log posterior (unnormalised), shape (n_walkers,); vectorised for emcee.

        Parameters
        ----------
        theta : ndarray (n_walkers, ndim) or (ndim,), parameter vectors in `layout` order
        batches : sequence of int, optional
            Sizes of consecutive groups of rows to evaluate exactly as separate calls would (bit
            for bit): the likelihood's matrix products over objects, whose summation order BLAS
            may choose by the number of rows, are split at the group boundaries. Lets a caller
            stack small evaluations (a point and its finite-difference neighbours) into one call.
        """
        theta = np.atleast_2d(theta)
        out = self.log_prior(theta)
        ok = np.isfinite(out)
        if ok.all():
            out = out + self.log_likelihood(theta, batches)
        elif np.any(ok):
            if batches is not None:
                batches = [int(part.sum()) for part in _split(ok, batches)]
                batches = [size for size in batches if size] or None
            out[ok] = out[ok] + self.log_likelihood(theta[ok], batches)
        out[~np.isfinite(out)] = -np.inf
        return out

    def components(self, theta: np.ndarray) -> dict:
        """Per-object pieces of the mean at one parameter vector: a dict with alpha, beta,
        k_eff (k - beta gamma), sigma2 (intrinsic variance per object, dex²), delta (mass-method
        offset per object, dex) and host_offset (host-type offset per object, dex)."""
        theta = np.asarray(theta, dtype=float)
        d = self.design
        layout = self.layout
        sig2 = theta[layout.scatter] ** 2
        delta_all = np.concatenate([[0.0], theta[layout.group_slice("method")]])
        host_all = np.concatenate([[0.0], theta[layout.group_slice("host_type")]])
        beta = theta[layout.index_beta] if self.relation else 1.0
        return {"alpha": theta[layout.index_alpha], "beta": beta,
                "k_eff": theta[layout.index_k] - beta * self.gamma,
                "sigma2": sig2[d.scatter_index] if sig2.size > 1 else np.full(len(d.x), sig2[0]),
                "delta": delta_all[d.method_index], "host_offset": host_all[d.host_index]}

    def per_object_log_likelihood(self, theta: np.ndarray) -> np.ndarray:
        """Log likelihood of every object at one parameter vector, shape (N,)."""
        return self._log_likelihood_chunk(np.atleast_2d(theta), reduce=False)[0]

    def latent_mean(self, theta) -> np.ndarray:
        """Mean latent log M_BH (log10 Msun) at the observed epoch, shape (n_walkers, N): the
        shared forward model `model.mean.latent_mean` with this model's hosts and offsets."""
        return self._mean(np.atleast_2d(theta), self._all_rows)

    def _mean(self, theta, rows):
        layout = self.layout
        beta = _column(theta, layout.index_beta) if self.relation else 1.0
        k_eff = _column(theta, layout.index_k) - beta * self.gamma
        # a host-type offset is a real shift of the latent mass, seen by a selection on it
        host = (layout.per_object_offsets(theta, "host_type", rows.host_index)
                if self._host_offsets else None)
        return latent_mean(_column(theta, layout.index_alpha), beta, k_eff, rows.s_centred, rows.x,
                           host_offset=host)

    def _latent(self, theta, rows=None, total=True):
        """Per object and walker: latent mean mu_true, offset delta, latent variance var_lat and the
        total variance of m_obs (docs/method.md#model; None when `total` is False), on `rows` (a
        `_Rows`; default all rows)."""
        rows = self._all_rows if rows is None else rows
        layout = self.layout
        beta = _column(theta, layout.index_beta) if self.relation else 1.0
        sig2 = theta[:, layout.scatter] ** 2
        sig2_obj = sig2 if sig2.shape[1] == 1 else sig2[:, rows.scatter_index]
        if self._method_offsets:
            delta = layout.per_object_offsets(theta, "method", rows.method_index)
        else:
            delta = 0.0
        mu_true = self._mean(theta, rows)
        if self.relation:
            var_lat = sig2_obj + beta**2 * rows.s_err2
            var = var_lat + rows.m_err2 if total else None
        else:
            var_lat = sig2_obj + rows.s_err2
            var = sig2_obj + rows.ev_ratio if total else None
        return mu_true, delta, var_lat, var

    def _features(self):
        """The per-object features of the latent mass as an affine function of per-walker
        coefficients (`_coefficients`), for the compiled selection loops (selection.kernels.Affine)."""
        d = self.design
        return {"s": d.s_centred, "x": d.x, "e": d.s_err**2,
                "sig2_at": d.scatter_index if len(d.scatter_names) > 1 else None,
                "off_at": d.method_index if self._method_offsets else None,
                "host_at": d.host_index if self._host_offsets else None}

    def _coefficients(self, theta):
        """Per walker: (alpha, beta, k_eff, beta²), the intrinsic variances and the offset tables
        (column 0 the zero point) of `_latent`, with the same arithmetic."""
        layout = self.layout
        coef = np.empty((len(theta), 4))
        coef[:, 0] = theta[:, layout.index_alpha]
        beta = theta[:, layout.index_beta] if self.relation else 1.0
        coef[:, 1] = beta
        coef[:, 2] = theta[:, layout.index_k] - beta * self.gamma
        coef[:, 3] = beta**2
        off = layout.offset_table(theta, "method") if self._method_offsets else None
        host = layout.offset_table(theta, "host_type") if self._host_offsets else None
        return coef, theta[:, layout.scatter] ** 2, off, host

    def _selection_chunk(self, theta, batches=None):
        """Moments for the Gaussian part plus the selection correction (no outliers)."""
        log_like = self._moments.log_likelihood(theta, batches)
        if self._correction is None:
            return log_like
        corrected = self._corrected_rows
        correction = self._correction.from_coefficients(
            *self._coefficients(theta), fallback=lambda: self._latent(theta, corrected, total=False)[:3])
        if correction is None:  # the compiled loops are not built: numpy on the latent arrays
            correction = self._correction(*self._latent(theta, corrected, total=False)[:3])
        rows = self._correction.rows
        if self._scatter_correction:
            # summed over every object in catalogue order (zeros elsewhere), as the pinned fits were made
            every = np.zeros((len(theta), len(self.design.m_obs)))
            every[:, rows] = correction
            correction = every
        return log_like + correction.sum(axis=1)

    def _log_likelihood_chunk(self, theta, reduce=True):
        d = self.design
        mu_true, delta, var_lat, var = self._latent(theta)
        resid2 = (d.m_obs - mu_true - delta) ** 2
        log_like = -0.5 * (resid2 / var + np.log(var) + LOG_2PI)
        if self.options.outliers:
            f_out = _column(theta, self.layout.index_f_out)
            var_out = var + _column(theta, self.layout.index_sigma_out) ** 2
            log_out = -0.5 * (resid2 / var_out + np.log(var_out) + LOG_2PI)
            log_like = np.logaddexp(np.log1p(-f_out) + log_like, np.log(f_out) + log_out)
        if self._correction is not None:
            rows = self._correction.rows
            log_like[:, rows] += self._correction(*_on_rows(rows, mu_true, delta, var_lat))
        return log_like.sum(axis=1) if reduce else log_like

    # ----- starting point ---------------------------------------------------------------
    def initial_guess(self) -> np.ndarray:
        """Weighted least squares for (k, alpha, beta, offsets) and a moment estimate of the scatter."""
        d = self.design
        target = d.m_obs - (0.0 if self.relation else d.s_centred)
        columns = [np.ones_like(d.x)] + ([d.s_centred] if self.relation else []) + [-d.x]
        columns += _offset_dummies(d)
        design_matrix = np.column_stack(columns)
        coef, *_ = np.linalg.lstsq(design_matrix, target, rcond=None)
        resid = target - design_matrix @ coef
        scatter = np.sqrt(max(np.var(resid) - np.mean(self._all_rows.ev_ratio), 0.05**2))
        layout = self.layout
        theta = np.empty(self.ndim)
        theta[layout.index_k] = coef[2 if self.relation else 1]
        theta[layout.index_alpha] = coef[0]
        if self.relation:
            theta[layout.index_beta] = coef[1]
        theta[layout.scatter] = scatter
        theta[layout.offsets] = coef[(3 if self.relation else 2):]
        if self.options.outliers:
            theta[layout.outlier] = (0.05, 1.0)
        return np.clip(theta, self.lower + 1e-3, self.upper - 1e-3)


def _on_rows(rows, *arrays):
    """Each array restricted to `rows` on its last axis (scalars pass through)."""
    return [a if np.ndim(a) == 0 or np.shape(a)[-1] == 1 else a[..., rows] for a in arrays]


@dataclass(frozen=True)
class _Rows:
    """The design arrays the latent mean and variance need, on a subset of rows."""

    s_centred: np.ndarray
    x: np.ndarray
    s_err2: np.ndarray
    m_err2: np.ndarray
    ev_ratio: np.ndarray
    scatter_index: np.ndarray
    method_index: np.ndarray
    host_index: np.ndarray

    @classmethod
    def of(cls, design, rows=slice(None)):
        m_err2, s_err2 = design.m_err**2, design.s_err**2
        return cls(s_centred=design.s_centred[rows], x=design.x[rows], s_err2=s_err2[rows],
                   m_err2=m_err2[rows], ev_ratio=(m_err2 + s_err2)[rows],
                   scatter_index=design.scatter_index[rows], method_index=design.method_index[rows],
                   host_index=design.host_index[rows])


def offset_widths(setting: float | dict, labels) -> np.ndarray:
    """Gaussian prior widths (dex) of the offsets of `labels`: one number for all, or a table
    label -> width with an optional "default" (0.3 dex when absent)."""
    if isinstance(setting, dict):
        default = setting.get("default", 0.3)
        return np.array([setting.get(label, default) for label in labels], dtype=float)
    return np.full(len(labels), float(setting))
