"""The data as the likelihood sees them (docs/method.md#model): a `Design` of plain arrays.

`build_design` turns a Catalog and the model options into the lever arm x, the centred host masses
(first order or regression-calibrated, docs/method.md#host-errors), the errors, and each object's
position in its offset groups: the mass method (zero point first) and the host type (zero point
first; rows of type "unspecified" take no host-type offset).
"""

from dataclasses import dataclass

import numpy as np

from ..data.catalog import DEFAULT_HOST_TYPE, Catalog
from ..errors import ConfigError


@dataclass(frozen=True, eq=False)
class Design:
    """The data as plain arrays, in the order the likelihood uses them."""

    x: np.ndarray          # log10[(1+z)/(1+z_ref)]
    s_centred: np.ndarray  # log M* - pivot, log10 Msun
    m_obs: np.ndarray      # log M_BH, log10 Msun
    m_err: np.ndarray      # dex
    s_err: np.ndarray      # dex
    method_index: np.ndarray   # 0 = zero-point method
    scatter_index: np.ndarray  # 0 when the scatter is shared
    method_names: tuple        # zero-point first
    scatter_names: tuple
    host_index: np.ndarray = None  # 0 = zero-point host type or "unspecified"
    host_type_names: tuple = ()    # zero-point first; empty when no row has a host type

    def __post_init__(self):
        if self.host_index is None:
            object.__setattr__(self, "host_index", np.zeros(len(self.x), dtype=np.intp))
        n = len(self.x)
        for name in ("s_centred", "m_obs", "m_err", "s_err", "method_index", "scatter_index", "host_index"):
            if len(getattr(self, name)) != n:
                raise ValueError(f"Design: {name} has {len(getattr(self, name))} rows, expected {n}")


def lever_arm(z, z_ref: float = 0.0) -> np.ndarray:
    """x = log10[(1+z)/(1+z_ref)], the lever arm of coupled growth (z, z_ref: redshifts)."""
    return np.log10((1.0 + np.asarray(z, dtype=float)) / (1.0 + z_ref))


def choose_zero_point(catalog: Catalog) -> str:
    """Default zero-point method: the most common method of the lowest-median-redshift sample."""
    medians = {name: np.median(catalog.z[catalog.sample == name]) for name in catalog.sample_names}
    lowest = min(medians, key=medians.get)
    methods, counts = np.unique(catalog.method[catalog.sample == lowest].astype(str), return_counts=True)
    return str(methods[np.argmax(counts)])


def choose_zero_point_host_type(catalog: Catalog) -> str | None:
    """Default zero-point host type: the most common host type of the sample with the lowest
    median redshift among those with a host type; None when no row has one."""
    typed = catalog.host_type != DEFAULT_HOST_TYPE
    if not np.any(typed):
        return None
    medians = {name: np.median(catalog.z[typed & (catalog.sample == name)])
               for name in catalog.sample_names if np.any(typed & (catalog.sample == name))}
    lowest = min(medians, key=medians.get)
    types, counts = np.unique(catalog.host_type[typed & (catalog.sample == lowest)].astype(str),
                              return_counts=True)
    return str(types[np.argmax(counts)])


def host_type_groups(catalog: Catalog, zero_point: str | None = None) -> tuple:
    """Host types of the data, the zero point first, and each row's position among them.

    Rows of type "unspecified" share position 0 with the zero point: they take no offset.

    Parameters
    ----------
    catalog : Catalog
    zero_point : str, optional; default `choose_zero_point_host_type`

    Returns
    -------
    names : tuple of str (empty when no row has a host type); index : ndarray of int (N,)
    """
    types = [t for t in catalog.host_type_names if t != DEFAULT_HOST_TYPE]
    if not types:
        return (), np.zeros(len(catalog), dtype=np.intp)
    zero_point = zero_point or choose_zero_point_host_type(catalog)
    if zero_point not in types:
        raise ConfigError(f"model.zero_point_host_type: {zero_point!r} is not a host type of the data; "
                          f"expected one of {', '.join(types)}")
    names = (zero_point,) + tuple(t for t in types if t != zero_point)
    lookup = {name: i for i, name in enumerate(names)}
    return names, np.array([lookup.get(t, 0) for t in catalog.host_type], dtype=np.intp)


def calibrated_hosts(catalog: Catalog, mode: str = "calibrated", host_priors: dict | None = None) -> tuple:
    """Host masses and their errors as the likelihood uses them.

    "first_order": the observed log M* with its error (docs/method.md#model, first-order errors in
    variables). "calibrated" (default): regression calibration (Carroll et al. 2006, Measurement
    Error in Nonlinear Models, ch. 4): within each sample the true hosts are taken as Gaussian with
    the sample's observed mean and deconvolved variance tau^2 = var(s_obs) - mean(e_s^2), so
    s_true | s_obs ~ N((tau^2 s_obs + e_s^2 mean) / (tau^2 + e_s^2), tau^2 e_s^2 / (tau^2 + e_s^2)).
    Without it, host errors scattering objects across a steep mass function bias each sample's
    relation differently, and the difference leaks into k. The exact treatment is Kelly (2007).
    `host_priors` ({sample: (mean, variance)} of the true hosts) replaces a sample's observed
    moments, e.g. by the parent (pre-selection) distribution from `hostprior.parent_host_priors`.

    Returns
    -------
    log_mstar : ndarray, log10 Msun;  log_mstar_err : ndarray, dex
    """
    s_obs = np.asarray(catalog.log_mstar, dtype=float)
    err2 = np.asarray(catalog.log_mstar_err, dtype=float) ** 2
    if mode == "first_order":
        return s_obs, np.sqrt(err2)
    host, host_var = s_obs.copy(), err2.copy()
    host_priors = host_priors or {}
    for name in catalog.sample_names:
        rows = catalog.sample == name
        if name in host_priors:
            centre, spread = host_priors[name]
        elif rows.sum() < 5:
            continue  # too few hosts to estimate their spread: keep first order
        else:
            centre, spread = observed_host_moments(s_obs[rows], err2[rows])
        shrink = spread / (spread + err2[rows])
        host[rows] = shrink * s_obs[rows] + (1 - shrink) * centre
        host_var[rows] = shrink * err2[rows]
    return host, np.sqrt(host_var)


def observed_host_moments(s_obs: np.ndarray, err2: np.ndarray) -> tuple:
    """Mean and deconvolved variance of a sample's true hosts (floored at 10 % of the observed)."""
    variance = np.var(s_obs, ddof=1)
    return float(np.mean(s_obs)), float(max(variance - np.mean(err2), 0.1 * variance, 1e-4))


def build_design(catalog, options, host_priors=None) -> Design:
    """Arrays of the likelihood from a Catalog and ModelOptions.

    Parameters
    ----------
    catalog : Catalog
    options : config.ModelOptions (zero points, scatter mode, host-error treatment, pivot, z_ref)
    host_priors : {sample: (mean, variance)}, optional, see `calibrated_hosts`

    Raises
    ------
    ConfigError
        A configured zero-point method or host type that the data do not have.
    """
    zero_point = options.zero_point_method or choose_zero_point(catalog)
    methods = list(catalog.method_names)
    if zero_point not in methods:
        raise ConfigError(f"model.zero_point_method: {zero_point!r} is not a method of the data; "
                          f"expected one of {', '.join(methods)}")
    method_names = (zero_point,) + tuple(m for m in methods if m != zero_point)
    lookup = {name: i for i, name in enumerate(method_names)}
    if options.scatter == "per_sample":
        scatter_names = catalog.sample_names
    else:
        scatter_names = ("all",)
    scatter_lookup = {name: i for i, name in enumerate(scatter_names)}
    scatter_index = (np.array([scatter_lookup[s] for s in catalog.sample], dtype=np.intp)
                     if len(scatter_names) > 1 else np.zeros(len(catalog), dtype=np.intp))
    host, host_err = calibrated_hosts(catalog, options.host_errors, host_priors)
    host_type_names, host_index = host_type_groups(catalog, options.zero_point_host_type)
    return Design(x=lever_arm(catalog.z, options.z_ref),
                  s_centred=host - options.log_mstar_pivot,
                  m_obs=np.asarray(catalog.log_mbh, dtype=float), m_err=np.asarray(catalog.log_mbh_err),
                  s_err=host_err,
                  method_index=np.array([lookup[m] for m in catalog.method], dtype=np.intp),
                  scatter_index=scatter_index, method_names=method_names, scatter_names=scatter_names,
                  host_index=host_index, host_type_names=host_type_names)
