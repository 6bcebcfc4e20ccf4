"""Plans and independent closed forms shared by the forecast tests.

The closed forms do not use cosmogrow: redshift moments come from scipy quadrature of astropy's
differential comoving volume (Planck18, the simulator's default cosmology).
"""

import numpy as np
from astropy.cosmology import Planck18
from scipy import integrate

from cosmogrow.forecast.plan import parse_plan


def lever_arm_moments(z_lo, z_hi):
    """Mean and variance of x = log10(1+z) for z uniform in comoving volume on [z_lo, z_hi]."""
    def volume(z):
        return Planck18.differential_comoving_volume(z).value

    norm = integrate.quad(volume, z_lo, z_hi)[0]
    mean = integrate.quad(lambda z: volume(z) * np.log10(1 + z), z_lo, z_hi)[0] / norm
    second = integrate.quad(lambda z: volume(z) * np.log10(1 + z) ** 2, z_lo, z_hi)[0] / norm
    return mean, second - mean**2


def closed_form_sigma_k(samples, sigma_int, *, separate_intercepts=False):
    """σ_k = [Σ_i w_i (x_i − x̄_w)²]^(−1/2), expected over z uniform in comoving volume.

    samples : list of (n, z_lo, z_hi, log_mbh_err, log_mstar_err); w = 1/(σ_int² + e_m² + e_s²).
    With `separate_intercepts` every sample has its own intercept (an offset without prior), so
    x̄_w is each sample's own mean: σ_k = [Σ_s n_s w_s Var_s(x)]^(−1/2).
    """
    rows = []
    for n, z_lo, z_hi, e_m, e_s in samples:
        mean, var = lever_arm_moments(z_lo, z_hi)
        rows.append((n / (sigma_int**2 + e_m**2 + e_s**2), mean, var))
    if separate_intercepts:
        return sum(weight * var for weight, _, var in rows) ** -0.5
    x_bar = sum(weight * mean for weight, mean, _ in rows) / sum(weight for weight, _, _ in rows)
    return sum(weight * (var + (mean - x_bar) ** 2) for weight, mean, var in rows) ** -0.5


def sample(name, n, z_range, method, **extra):
    return {"name": name, "n": n, "z_range": list(z_range), "method": method, **extra}


def make_plan(samples, *, truth=None, model=None, forecast=None, seed=1):
    """A ForecastPlan from sample tables (first-order host errors unless `model` says otherwise)."""
    raw = {"seed": seed, "truth": truth or {"k": 1.0, "sigma_int": 0.3},
           "model": {"host_errors": "first_order", **(model or {})},
           "forecast": forecast or {}, "sample": samples}
    return parse_plan(raw)
