"""The dark-energy budget of a coupled population of stellar-remnant black holes (docs/method.md#budget).

Black holes form with comoving mass density d rho = eps_BH psi(z_f) dt_f and then grow as
(a / a_f)^k, so the comoving density at scale factor a is

    rho_BH,c(a) = ∫ eps_BH psi(t_f) (a / a_f)^k dt_f        (Msun Mpc^-3, comoving)

over formation epochs from z_max down to max(z, z_floor). With x = ln(1+z) and dt = dx / H(z)
the integrand per unit x is the black-hole formation rate R(x) = eps_BH psi(z) / H(z) and
(a / a_f)^k = exp(k (x_f - x)). The integral is done once on a fixed grid in x (trapezoid, 2049
nodes by default), for a whole array of k at a time (a chain of k from a posterior).

Formation window: no black holes form before z_max (default 20) nor after z_floor (default 0,
i.e. formation continues to today). With z_floor > 0 the population is frozen below z_floor and
then evolves as a single mixture of cohorts, rho_phys ∝ a^(k-3), w_eff = -k/3.

Effective equation of state of the population, from rho_phys = rho_BH,c / a^3:
    w_eff = -1 - (1/3) dln rho_phys / dln a = -k/3 - R(z) / (3 rho_BH,c(z)),
exact (the second term is fresh formation; Croker & Weiner 2019, ApJ 882, 19, give -k/3 for a
coupled population without sources).
"""

from dataclasses import dataclass

import numpy as np
from astropy import units as u

from ..errors import ConfigError

DEFAULT_Z_MAX = 20.0
DEFAULT_N_GRID = 2049
_CHUNK_ELEMENTS = 2_000_000  # k rows × grid nodes evaluated at once, to bound memory
PERCENTILES = {"p2_5": 2.5, "p16": 16.0, "median": 50.0, "p84": 84.0, "p97_5": 97.5}


@dataclass(frozen=True, eq=False)
class FormationHistory:
    """Black-hole mass formation rate on a grid in x = ln(1+z).

    Attributes
    ----------
    x : ndarray, ln(1+z) nodes from ln(1+z_floor) to ln(1+z_max), increasing
    rate : ndarray, Msun Mpc^-3 per unit ln(1+z): eps_BH psi(z) / H(z), comoving
    eps_bh : float, black-hole mass per unit stellar mass formed
    z_floor, z_max : float, formation window (redshift)
    """

    x: np.ndarray
    rate: np.ndarray
    eps_bh: float
    z_floor: float
    z_max: float

    @property
    def z(self):
        """Redshift of the grid nodes."""
        return np.expm1(self.x)


def hubble_per_yr(cosmo, z):
    """Hubble rate H(z) in yr^-1."""
    return np.asarray(cosmo.H(z).to_value(1 / u.yr))


def critical_density0_msun_mpc3(cosmo):
    """Critical density today, rho_crit,0, in Msun Mpc^-3."""
    return float(cosmo.critical_density0.to_value(u.Msun / u.Mpc**3))


def dark_energy_density_msun_mpc3(cosmo, z):
    """Physical dark-energy density at z, Msun Mpc^-3 (constant in z for a cosmological constant)."""
    return cosmo.Ode0 * critical_density0_msun_mpc3(cosmo) * np.asarray(cosmo.de_density_scale(z))


def formation_history(cosmo, sfr, *, eps_bh, z_max=DEFAULT_Z_MAX, z_floor=0.0, n_grid=DEFAULT_N_GRID):
    """Tabulate the black-hole formation rate per unit ln(1+z).

    Parameters
    ----------
    cosmo : astropy Cosmology
    sfr : callable z -> psi (Msun yr^-1 Mpc^-3, comoving), e.g. `cosmogrow.consequences.sfr.madau_dickinson_2014`
    eps_bh : float, black-hole mass per unit stellar mass formed (> 0)
    z_max : float, redshift at which formation starts
    z_floor : float, redshift after which no black holes form (0: formation continues to today)
    n_grid : int, number of grid nodes, uniform in ln(1+z)
    """
    if not (np.isfinite(eps_bh) and eps_bh > 0):
        raise ConfigError(f"eps_BH: expected a positive number, got {eps_bh}")
    if not (np.isfinite(z_floor) and np.isfinite(z_max) and 0 <= z_floor < z_max):
        raise ConfigError(f"formation window: expected 0 <= z_floor < z_max, got z_floor={z_floor}, "
                          f"z_max={z_max}")
    if n_grid < 3:
        raise ConfigError(f"formation grid: expected at least 3 nodes, got {n_grid}")
    x = np.linspace(np.log1p(z_floor), np.log1p(z_max), int(n_grid))
    z = np.expm1(x)
    psi = np.asarray(sfr(z), dtype=float)
    if psi.shape != z.shape or not np.all(np.isfinite(psi)) or np.any(psi < 0):
        raise ConfigError("star-formation rate: expected finite values >= 0 on the formation grid")
    rate = eps_bh * psi / hubble_per_yr(cosmo, z)
    x.setflags(write=False)
    rate.setflags(write=False)
    return FormationHistory(x=x, rate=rate, eps_bh=float(eps_bh), z_floor=float(z_floor), z_max=float(z_max))


def _interpolation(history, z):
    """Grid index, fraction and a mask 'after the window ends' for query redshifts."""
    xq = np.log1p(np.asarray(z, dtype=float))
    x = history.x
    xc = np.clip(xq, x[0], x[-1])
    idx = np.clip(np.searchsorted(x, xc, side="right") - 1, 0, len(x) - 2)
    frac = (xc - x[idx]) / (x[idx + 1] - x[idx])
    return xq, idx, frac, xq > x[-1]


def _density_matrix(history, k, z):
    """rho_BH,c for every (k, z) pair: shape (len(k), len(z)), Msun Mpc^-3 comoving."""
    k = np.asarray(k, dtype=float).ravel()
    z = np.asarray(z, dtype=float).ravel()
    if not np.all(np.isfinite(k)):
        raise ConfigError("k: expected finite values")
    if np.any(z < 0) or not np.all(np.isfinite(z)):
        raise ConfigError("redshift: expected finite values >= 0")
    x, rate = history.x, history.rate
    dx = np.diff(x)
    xq, idx, frac, beyond = _interpolation(history, z)
    out = np.empty((k.size, z.size))
    chunk = max(1, _CHUNK_ELEMENTS // len(x))
    for start in range(0, k.size, chunk):
        kk = k[start:start + chunk, None]
        integrand = rate * np.exp(kk * x)
        segments = 0.5 * (integrand[:, 1:] + integrand[:, :-1]) * dx
        tail = np.zeros((kk.shape[0], len(x)))
        tail[:, :-1] = np.cumsum(segments[:, ::-1], axis=1)[:, ::-1]  # ∫ from node to x_max
        # From a query point to the next node: trapezoid with the integrand interpolated linearly.
        f_q = integrand[:, idx] * (1.0 - frac) + integrand[:, idx + 1] * frac
        s_q = tail[:, idx + 1] + 0.5 * (f_q + integrand[:, idx + 1]) * (x[idx + 1] - x[idx]) * (1.0 - frac)
        out[start:start + chunk] = np.where(beyond, 0.0, s_q * np.exp(-kk * xq))
    return out


def comoving_density(history, k, z=0.0):
    """Comoving black-hole mass density rho_BH,c at redshift z, Msun Mpc^-3.

    Parameters
    ----------
    history : FormationHistory
    k : float or array_like, coupling exponent(s)
    z : float or array_like, redshift(s) >= 0

    Returns
    -------
    ndarray of shape np.shape(k) + np.shape(z) (a float when both are scalars)
    """
    out = _density_matrix(history, k, z).reshape(np.shape(k) + np.shape(z))
    return float(out) if out.ndim == 0 else out


def physical_density(history, k, z):
    """Physical black-hole mass density rho_BH,c (1+z)^3, Msun Mpc^-3; shape as `comoving_density`."""
    return comoving_density(history, k, z) * (1.0 + np.asarray(z, dtype=float)) ** 3


def formation_rate(history, z):
    """Black-hole mass formed per unit ln(1+z), Msun Mpc^-3 (comoving); zero outside the window."""
    xq = np.log1p(np.asarray(z, dtype=float))
    inside = (xq >= history.x[0]) & (xq <= history.x[-1])
    return np.where(inside, np.interp(xq, history.x, history.rate), 0.0)


def effective_w(history, k, z):
    """Effective equation of state w_eff = -1 - (1/3) dln rho_phys / dln a of the population.

    Computed exactly as -k/3 - R(z) / (3 rho_BH,c(z)); NaN where the population is empty
    (z >= z_max). Shape as `comoving_density`.
    """
    rho = np.asarray(comoving_density(history, k, z))
    k_arr = np.asarray(k, dtype=float).reshape(np.shape(k) + (1,) * np.ndim(z))
    with np.errstate(divide="ignore", invalid="ignore"):
        w = -k_arr / 3.0 - formation_rate(history, z) / (3.0 * rho)
    w = np.where(rho > 0, w, np.nan)
    return float(w) if w.ndim == 0 else w


def single_cohort_physical_density(rho_form, z_form, z, k):
    """Physical density of one cohort of comoving density `rho_form` (Msun Mpc^-3) formed at z_form.

    rho_phys(z) = rho_form (a / a_f)^k / a^3 for z <= z_form, zero before it.
    """
    a = 1.0 / (1.0 + np.asarray(z, dtype=float))
    a_f = 1.0 / (1.0 + z_form)
    return np.where(a >= a_f, rho_form * (a / a_f) ** k / a**3, 0.0)


def summarise_samples(values):
    """Median and central 68 / 95 % intervals (and mean, count) of a 1-D sample."""
    values = np.asarray(values, dtype=float).ravel()
    summary = {name: float(np.percentile(values, q)) for name, q in PERCENTILES.items()}
    summary["mean"] = float(np.mean(values))
    summary["n_samples"] = int(values.size)
    return summary


def thin_by_quantile(samples, n_max=1000):
    """At most `n_max` values at evenly spaced quantiles of `samples` (deterministic thinning)."""
    samples = np.sort(np.asarray(samples, dtype=float).ravel())
    if samples.size <= n_max:
        return samples
    return samples[np.linspace(0, samples.size - 1, n_max).round().astype(int)]


def evaluate_budget(history, k, cosmo):
    """Omega_BH today and the fraction of Omega_Lambda it makes, for one k or an array of k.

    Returns
    -------
    dict with rho_bh_comoving_today (Msun Mpc^-3), omega_bh, fraction_of_lambda (arrays shaped
    like k, floats for scalar k), omega_lambda, rho_crit0 (Msun Mpc^-3).
    """
    rho_crit0 = critical_density0_msun_mpc3(cosmo)
    rho0 = comoving_density(history, k, 0.0)
    omega_bh = rho0 / rho_crit0
    omega_lambda = float(cosmo.Ode0)
    return {"rho_bh_comoving_today": rho0, "omega_bh": omega_bh,
            "fraction_of_lambda": omega_bh / omega_lambda if omega_lambda > 0 else np.nan * omega_bh,
            "omega_lambda": omega_lambda, "rho_crit0": rho_crit0}


def budget_curve(history, k, cosmo, z=None, n_points=161, n_thin=1000):
    """Tables of the population's density and w_eff against redshift, with dark energy beside.

    Parameters
    ----------
    history : FormationHistory
    k : float or array_like; an array (posterior chain) gives the median and 16/84 percentiles
        over a quantile-thinned copy of at most `n_thin` values
    cosmo : astropy Cosmology
    z : array_like, optional, redshifts; default `n_points` uniform in ln(1+z) from 0 to z_max

    Returns
    -------
    dict of equal-length arrays: z, rho_bh_comoving, rho_bh_physical (+ _p16, _p84),
    w_eff (+ _p16, _p84), rho_de_physical (all densities Msun Mpc^-3).
    """
    if z is None:
        z = np.expm1(np.linspace(0.0, np.log1p(history.z_max), n_points))
    z = np.asarray(z, dtype=float)
    k_values = thin_by_quantile(np.atleast_1d(k), n_thin)
    rho_c = _density_matrix(history, k_values, z)
    rho_phys = rho_c * (1.0 + z) ** 3
    w = np.asarray(effective_w(history, k_values, z)).reshape(rho_c.shape)
    # rho_BH,c > 0 for every k or for none at a given z, so a NaN column of w_eff is all-NaN
    # and np.percentile simply carries it through.
    curve = {"z": z, "rho_bh_comoving": np.median(rho_c, axis=0)}
    for name, table in (("rho_bh_physical", rho_phys), ("w_eff", w)):
        for suffix, q in (("", 50.0), ("_p16", 16.0), ("_p84", 84.0)):
            curve[name + suffix] = np.percentile(table, q, axis=0)
    curve["rho_de_physical"] = dark_energy_density_msun_mpc3(cosmo, z) * np.ones_like(z)
    return curve
