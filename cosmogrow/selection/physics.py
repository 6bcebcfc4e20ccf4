"""Selection models: each maps to a probit in the latent black-hole mass (docs/method.md#selection).

A model that acts on the black-hole mass m (log10 Msun) selects an object with probability
``P(S | m) = Φ((m - m_lim) / w)``; `threshold(z, log_mstar, cosmo)` returns ``(m_lim, w)`` arrays
(log10 Msun, dex), w = 0 being a hard cut. The attribute `on` says which mass the cut acts on:
"observed" (the catalogue's measured mass) or "intrinsic" (the true mass at the observed epoch).
`HostMassCut` acts on the observed host stellar mass instead (`on = "host"`).

`build_selection` turns a TOML table (or a list of tables: the cuts multiply) into these frozen
models, with messages that name the sample, the key and the valid choices.
"""

from dataclasses import asdict, dataclass, fields
from typing import ClassVar

from functools import lru_cache

import numpy as np

from .. import background
from ..errors import ConfigError
from ..interpolation import UniformTable



@lru_cache(maxsize=None)
def physical_constants() -> dict:
    """Constants of the selection models, from astropy's (imported here, on first use):
    L_EDD_PER_MSUN, the Eddington luminosity per solar mass 4π G Msun m_p c / σ_T (ionised hydrogen,
    erg/s; 1.257e38 with CODATA 2022); G_PC_KMS2_PER_MSUN, G in pc (km/s)² / Msun (4.3009e-3);
    ARCSEC_IN_RAD. Also readable as module attributes of these names."""
    from astropy import constants as const
    from astropy import units as u

    return {"L_EDD_PER_MSUN": float((4 * np.pi * const.G * const.M_sun * const.m_p * const.c / const.sigma_T)
                                    .to_value(u.erg / u.s)),
            "G_PC_KMS2_PER_MSUN": float(const.G.to_value(u.pc * u.km**2 / u.s**2 / u.Msun)),
            "ARCSEC_IN_RAD": float((1 * u.arcsec).to_value(u.rad))}


def __getattr__(name):
    if name in ("L_EDD_PER_MSUN", "G_PC_KMS2_PER_MSUN", "ARCSEC_IN_RAD"):
        return physical_constants()[name]
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


#: Thresholds are floored here (e.g. at z = 0, where every object passes a flux or SOI limit).
MIN_LOG_MASS = -100.0
_DIRECT_MAX = 512  # above this many redshifts, distances come from a table


def _distance(function, cosmo, z):
    """A background distance at many redshifts: direct for few, else from a table.

    For more than a few hundred redshifts, distance / z (smooth and finite at z = 0) is tabulated
    on 4097 evenly spaced redshifts and interpolated linearly (relative error < 2e-6 for
    0 <= z <= 10, i.e. < 1e-6 dex; tested):
    astropy integrates each redshift separately when the cosmology has massive neutrinos.
    """
    z = np.asarray(z, dtype=float)
    if z.size <= _DIRECT_MAX:
        return function(cosmo, z)
    lo, hi = float(np.min(z)), float(np.max(z))
    if hi - lo < 1e-9:
        return np.full(z.shape, float(function(cosmo, lo)))
    grid = np.linspace(lo, hi, 4097)
    grid_safe = np.where(grid > 0, grid, 1e-8)
    return z * UniformTable(lo, hi, function(cosmo, grid_safe) / grid_safe)(z)


def _log10_floor(value):
    with np.errstate(divide="ignore"):
        return np.maximum(np.log10(value), MIN_LOG_MASS)


def _full(z, log_mstar, value):
    return np.full(np.broadcast(np.asarray(z), np.asarray(log_mstar)).shape, float(value))


@dataclass(frozen=True)
class MassCut:
    """A threshold on log M_BH (log10 Msun): `on` the "observed" (default) or "intrinsic" mass,
    softened by a probit of `width` dex (0 = hard cut)."""

    log_mbh_min: float
    on: str = "observed"
    width: float = 0.0
    kind: ClassVar[str] = "mass_cut"

    def threshold(self, z, log_mstar, cosmo):
        """(m_lim, w) arrays, log10 Msun and dex."""
        return _full(z, log_mstar, self.log_mbh_min), _full(z, log_mstar, self.width)

    def to_dict(self):
        return {"kind": self.kind, **asdict(self)}


@dataclass(frozen=True)
class FluxLimit:
    """An AGN flux limit acting on the intrinsic mass.

    L_bol = lambda L_Edd,1 M, with L_Edd,1 = 4π G Msun m_p c / σ_T = 1.257e38 erg/s per Msun; the
    band flux F = L_bol / (BC 4π d_L²) must exceed `flux_limit` (erg s^-1 cm^-2); d_L from the run's
    cosmology. With log10 lambda ~ N(log_edd_mean, log_edd_width²) this is a probit in m:
    m_lim(z) = log10(BC 4π d_L² F_lim / L_Edd,1) - log_edd_mean, w = log_edd_width.
    Defaults: the Eddington-ratio distribution of broad-line AGN of Kollmeier et al. (2006, ApJ 648,
    128): lognormal peaking at L/L_Edd ≈ 1/4 with 0.3 dex width; BC = 1, i.e. `flux_limit` is a
    bolometric flux unless a bolometric correction L_bol / L_band is given.
    No K-correction. Caveat: single-epoch virial masses use the same luminosity, so their errors
    correlate with this selection; the model treats them as independent.
    """

    flux_limit: float
    bolometric_correction: float = 1.0
    log_edd_mean: float = float(np.log10(0.25))
    log_edd_width: float = 0.3
    kind: ClassVar[str] = "flux_limit"
    on: ClassVar[str] = "intrinsic"

    def threshold(self, z, log_mstar, cosmo):
        """(m_lim, w) arrays, log10 Msun and dex."""
        d_l = _distance(background.luminosity_distance_cm, cosmo, z)
        l_edd = physical_constants()["L_EDD_PER_MSUN"]
        limit = self.bolometric_correction * 4.0 * np.pi * d_l**2 * self.flux_limit / l_edd
        m_lim = np.maximum(_log10_floor(limit) - self.log_edd_mean, MIN_LOG_MASS)
        m_lim = m_lim + np.zeros(np.shape(log_mstar))
        return m_lim, np.full(m_lim.shape, self.log_edd_width)

    def to_dict(self):
        return {"kind": self.kind, **asdict(self)}


@dataclass(frozen=True)
class SphereOfInfluence:
    """Resolution of the black hole's sphere of influence, r_inf = G M / σ², acting on the intrinsic
    mass (dynamical samples).

    σ comes from an M-σ relation log M = a + b log10(σ/σ0) + ε, ε ~ N(0, s²) (default Kormendy &
    Ho 2013, ARA&A 51, 511: a = 8.49, b = 4.38, s = 0.29 dex, σ0 = 200 km/s); the object is kept
    when r_inf / D_A(z) >= `resolution_arcsec` (default 0.1″, HST-class: common practice).

    Derivation of (m_lim, w). For a black hole of mass m, σ from the relation inverted at fixed M
    (a flat prior on log σ) is log10(σ/σ0) = (m - a - ε)/b, so
    log10 r_inf = log10 G + m - 2 log10 σ0 - 2 (m - a - ε)/b. Resolution, log10 r_inf >=
    log10(D_A θ), reads m (b - 2) + 2a + 2ε >= b Λ with Λ = log10(D_A θ σ0² / G), i.e.
    m + 2ε/(b - 2) >= m_lim = (b Λ - 2a)/(b - 2) (b > 2). Since 2ε/(b - 2) ~ N(0, (2s/(b - 2))²),
    P(S | m) = Φ((m - m_lim)/w) with w = 2 s / (b - 2) = 0.244 dex for the defaults: the M-σ
    scatter, propagated through r_inf ∝ M^(1 - 2/b), not the scatter itself.
    Units: G in pc (km/s)² / Msun, D_A in pc, θ in radians, σ0 in km/s.
    """

    resolution_arcsec: float = 0.1
    msigma_intercept: float = 8.49
    msigma_slope: float = 4.38
    msigma_scatter: float = 0.29
    sigma_pivot: float = 200.0
    kind: ClassVar[str] = "sphere_of_influence"
    on: ClassVar[str] = "intrinsic"

    def threshold(self, z, log_mstar, cosmo):
        """(m_lim, w) arrays, log10 Msun and dex."""
        d_a_pc = _distance(background.angular_diameter_distance_mpc, cosmo, z) * 1e6
        theta = self.resolution_arcsec * physical_constants()["ARCSEC_IN_RAD"]
        g_pc = physical_constants()["G_PC_KMS2_PER_MSUN"]
        log_scale = _log10_floor(d_a_pc * theta * self.sigma_pivot**2 / g_pc)
        b = self.msigma_slope
        m_lim = np.maximum((b * log_scale - 2.0 * self.msigma_intercept) / (b - 2.0), MIN_LOG_MASS)
        m_lim = m_lim + np.zeros(np.shape(log_mstar))
        return m_lim, np.full(m_lim.shape, self.width)

    @property
    def width(self):
        """Probit width, dex: 2 s / (b - 2)."""
        return 2.0 * self.msigma_scatter / (self.msigma_slope - 2.0)

    def to_dict(self):
        return {"kind": self.kind, **asdict(self)}


@dataclass(frozen=True)
class HostMassCut:
    """A hard threshold on the observed host stellar mass, log10 Msun.

    It leaves the fit's likelihood unchanged (the fit conditions on the observed host mass); the
    simulator applies it.
    """

    log_mstar_min: float
    kind: ClassVar[str] = "host_mass_cut"
    on: ClassVar[str] = "host"

    def to_dict(self):
        return {"kind": self.kind, **asdict(self)}


MODELS = {model.kind: model for model in (MassCut, FluxLimit, SphereOfInfluence, HostMassCut)}
REQUIRED = {"mass_cut": ("log_mbh_min",), "flux_limit": ("flux_limit",),
            "sphere_of_influence": (), "host_mass_cut": ("log_mstar_min",)}
_ON_CHOICES = ("observed", "intrinsic")
# key -> (test, what is expected)
_RULES = {
    "log_mbh_min": (lambda v: True, "a number"),
    "log_mstar_min": (lambda v: True, "a number"),
    "width": (lambda v: v >= 0, "a number >= 0 (dex)"),
    "flux_limit": (lambda v: v > 0, "a positive flux (erg s^-1 cm^-2)"),
    "bolometric_correction": (lambda v: v > 0, "a positive number"),
    "log_edd_mean": (lambda v: True, "a number (log10 L/L_Edd)"),
    "log_edd_width": (lambda v: v >= 0, "a number >= 0 (dex)"),
    "resolution_arcsec": (lambda v: v > 0, "a positive angle (arcsec)"),
    "msigma_intercept": (lambda v: True, "a number (log10 Msun)"),
    "msigma_slope": (lambda v: v > 2, "a slope > 2 (below 2, r_inf does not grow with mass)"),
    "msigma_scatter": (lambda v: v >= 0, "a number >= 0 (dex)"),
    "sigma_pivot": (lambda v: v > 0, "a positive velocity dispersion (km/s)"),
}
SELECTION_KINDS = tuple(MODELS)


def build_selection(spec, *, where=""):
    """Selection models from a TOML value.

    Parameters
    ----------
    spec : None, dict, model, or list of dicts/models
        One table ``{kind = ..., ...}`` or a list of them (the cuts multiply); None or [] gives no
        selection. Kinds: mass_cut, flux_limit, sphere_of_influence, host_mass_cut.
    where : str
        What the selection belongs to (e.g. "sample 'bright'"), for error messages.

    Returns
    -------
    tuple of models

    Raises
    ------
    ConfigError
        Unknown kind or key, missing key, or a bad value, naming `where` and the key.
    """
    prefix = f"{where}: selection" if where else "selection"
    if spec is None:
        return ()
    items = list(spec) if isinstance(spec, (list, tuple)) else [spec]
    models = []
    for i, item in enumerate(items):
        label = f"{prefix}[{i}]" if len(items) > 1 else prefix
        models.append(item if isinstance(item, tuple(MODELS.values())) else _build_one(item, label))
    return tuple(models)


def _build_one(table, label):
    if not isinstance(table, dict):
        raise ConfigError(f"{label}: expected a table with 'kind', got {table!r}")
    if "kind" not in table:
        raise ConfigError(f"{label}: missing key 'kind'; expected one of {', '.join(SELECTION_KINDS)}")
    kind = table["kind"]
    if not isinstance(kind, str) or kind not in MODELS:
        raise ConfigError(f"{label}: unknown kind {kind!r}; expected one of {', '.join(SELECTION_KINDS)}")
    model = MODELS[kind]
    valid = [f.name for f in fields(model)]
    unknown = sorted(set(table) - set(valid) - {"kind"})
    if unknown:
        raise ConfigError(f"{label}: unknown key(s) {', '.join(map(repr, unknown))} for kind "
                          f"{kind!r}; expected some of {', '.join(valid)}")
    missing = [key for key in REQUIRED[kind] if key not in table]
    if missing:
        raise ConfigError(f"{label}: kind {kind!r} needs key(s) {', '.join(map(repr, missing))}")
    values = {}
    for key, value in table.items():
        if key == "kind":
            continue
        if key == "on":
            if value not in _ON_CHOICES:
                raise ConfigError(f"{label}: key 'on': expected one of {', '.join(_ON_CHOICES)}, "
                                  f"got {value!r}")
            values[key] = value
            continue
        test, expected = _RULES[key]
        ok = isinstance(value, (int, float)) and not isinstance(value, bool) and np.isfinite(value)
        if not ok or not test(value):
            raise ConfigError(f"{label}: key {key!r}: expected {expected}, got {value!r}")
        values[key] = float(value)
    return model(**values)


def describe_selection(models):
    """JSON-friendly list of a sample's selection models."""
    return [m.to_dict() for m in models]
