"""The galaxy stellar mass function the simulator draws hosts from.

Double Schechter form, per unit log10 stellar mass:
dn/dlog10 M = ln(10) e^(-M/M*) (M/M*) [φ1 (M/M*)^α1 + φ2 (M/M*)^α2]  (Mpc^-3 dex^-1).
Default parameters: Baldry et al. (2012, MNRAS 421, 621), GAMA at z < 0.06, h = 0.7, valid for
10^8-10^11.5 Msun: M* = 10^10.66 Msun, φ1 = 3.96e-3 Mpc^-3, α1 = -0.35, φ2 = 0.79e-3 Mpc^-3,
α2 = -1.47. The simulator uses this local shape at every redshift and does not rescale M* to the
run's Hubble constant (a stated simplification: only the shape matters for drawing hosts).
"""

from dataclasses import asdict, dataclass, fields

import numpy as np

from ..errors import ConfigError
from ..interpolation import UniformTable


@dataclass(frozen=True)
class DoubleSchechter:
    """Double Schechter stellar mass function (defaults: Baldry et al. 2012).

    Attributes
    ----------
    log_mchar : float, log10 M* (log10 Msun)
    phi1, phi2 : float, normalisations (Mpc^-3)
    alpha1, alpha2 : float, faint-end slopes
    """

    log_mchar: float = 10.66
    phi1: float = 3.96e-3
    alpha1: float = -0.35
    phi2: float = 0.79e-3
    alpha2: float = -1.47

    def density_per_dex(self, log_mstar):
        """dn/dlog10 M* (Mpc^-3 dex^-1) at log_mstar (log10 Msun)."""
        ratio = 10.0 ** (np.asarray(log_mstar, dtype=float) - self.log_mchar)
        return (np.log(10.0) * np.exp(-ratio) * ratio
                * (self.phi1 * ratio**self.alpha1 + self.phi2 * ratio**self.alpha2))

    def to_dict(self):
        return asdict(self)


BALDRY2012 = DoubleSchechter()


def mass_function_from_config(table, *, where="mass_function"):
    """A DoubleSchechter from a TOML table (keys: the attributes); None gives Baldry et al. 2012."""
    if table is None:
        return BALDRY2012
    if not isinstance(table, dict):
        raise ConfigError(f"{where}: expected a table, got {table!r}")
    valid = [f.name for f in fields(DoubleSchechter)]
    unknown = sorted(set(table) - set(valid))
    if unknown:
        raise ConfigError(f"{where}: unknown key(s) {', '.join(map(repr, unknown))}; "
                          f"expected some of {', '.join(valid)}")
    values = {}
    for key, value in table.items():
        ok = isinstance(value, (int, float)) and not isinstance(value, bool) and np.isfinite(value)
        if not ok or (key.startswith("phi") and value < 0):
            expected = "a number >= 0 (Mpc^-3)" if key.startswith("phi") else "a number"
            raise ConfigError(f"{where}: key {key!r}: expected {expected}, got {value!r}")
        values[key] = float(value)
    mass_function = DoubleSchechter(**{**BALDRY2012.to_dict(), **values})
    if mass_function.phi1 + mass_function.phi2 <= 0:
        raise ConfigError(f"{where}: phi1 + phi2 must be > 0")
    return mass_function


class HostMassSampler:
    """Draws log10 M* between two limits by the inverse CDF, tabulated on fine grids.

    Parameters
    ----------
    mass_function : DoubleSchechter
    log_min, log_max : float, log10 Msun
    n_grid : int, grid points (spacing (log_max - log_min)/(n_grid - 1); the trapezoid CDF is then
        accurate to ~1e-8)
    """

    def __init__(self, mass_function, log_min, log_max, n_grid=20001):
        self.grid = np.linspace(log_min, log_max, n_grid)
        density = mass_function.density_per_dex(self.grid)
        steps = 0.5 * (density[1:] + density[:-1]) * np.diff(self.grid)
        cumulative = np.concatenate([[0.0], np.cumsum(steps)])
        self.number_density = float(cumulative[-1])  # Mpc^-3 between the limits
        self.cdf_grid = cumulative / cumulative[-1]
        self._inverse = inverse_cdf_table(self.cdf_grid, self.grid)

    def cdf(self, log_mstar):
        """Fraction of hosts below log_mstar."""
        return np.interp(log_mstar, self.grid, self.cdf_grid)

    def draw(self, n, rng):
        """n host masses (log10 Msun) from a numpy Generator."""
        return self._inverse(rng.random(n))


def inverse_cdf_table(cdf_grid, grid, n_table=65537):
    """The inverse of a tabulated CDF, itself tabulated on evenly spaced probabilities (so drawing
    is a table look-up); each table cell holds 1/65536 of the probability."""
    levels = np.linspace(0.0, 1.0, n_table)
    return UniformTable(0.0, 1.0, np.interp(levels, cdf_grid, grid))
