"""The cosmological background, from astropy.

Units are accepted at this edge; the functions return plain float arrays in the units their
names state (Mpc, cm, Gyr, Mpc^3 sr^-1), so the numerical core never handles Quantities.
astropy is imported on first use (its import takes about a second): a fit without selection never
needs it, since a named cosmology is described from `REALISATIONS` until something asks for a
distance (`DeferredCosmology`).
"""

import importlib

import numpy as np

from . import validate
from .errors import ConfigError


class _LazyModule:
    """A module imported on first attribute access."""

    def __init__(self, name):
        self._name = name

    def __getattr__(self, attr):
        return getattr(importlib.import_module(self._name), attr)


_cosmo = _LazyModule("astropy.cosmology")
u = _LazyModule("astropy.units")

DEFAULT_COSMOLOGY = "Planck18"

_PARAMETRIC = {
    "LambdaCDM": ("H0", "Om0", "Ode0"),
    "FlatLambdaCDM": ("H0", "Om0"),
    "w0waCDM": ("H0", "Om0", "Ode0", "w0", "wa"),
    "Flatw0waCDM": ("H0", "Om0", "w0", "wa"),
    "wCDM": ("H0", "Om0", "Ode0", "w0"),
    "FlatwCDM": ("H0", "Om0", "w0"),
}
_OPTIONAL = ("Tcmb0", "Neff", "Ob0", "m_nu")


#: What `describe` says of astropy's built-in realisations, so that naming one needs no import of
#: astropy (tests/test_background.py checks every entry against astropy's own objects).
REALISATIONS = {
    "WMAP1": (72.0, 0.257, 0.7429194200190258, 2.725),
    "WMAP3": (70.1, 0.276, 0.7239149927205336, 2.725),
    "WMAP5": (70.2, 0.277, 0.7229152347340179, 2.725),
    "WMAP7": (70.4, 0.272, 0.7279157156707268, 2.725),
    "WMAP9": (69.32, 0.2865, 0.7134130689259821, 2.725),
    "Planck13": (67.77, 0.30712, 0.6913911505510131, 2.7255),
    "Planck15": (67.74, 0.3075, 0.6910098315260953, 2.7255),
    "Planck18": (67.66, 0.30966, 0.6888463055445441, 2.7255),
}


class DeferredCosmology:
    """One of astropy's built-in realisations (`REALISATIONS`), built when first used.

    Attribute access (distances, ages, H0, ...) builds the astropy object and delegates to it;
    `describe` answers from `REALISATIONS` without building it. Pickles by name.
    """

    def __init__(self, name: str):
        self.__dict__["realisation"] = name
        self.__dict__["_built"] = None

    def build(self):
        """The astropy cosmology itself."""
        if self._built is None:
            self.__dict__["_built"] = _realisation(self.realisation)
        return self._built

    def __getattr__(self, attr):
        return getattr(self.build(), attr)

    def __reduce__(self):
        return (DeferredCosmology, (self.realisation,))

    def __repr__(self):
        return f"DeferredCosmology({self.realisation!r})"


def available_realisations():
    """Names of astropy's built-in cosmology realisations (Planck18, WMAP9, ...)."""
    return tuple(_cosmo.realizations.available)


def get_cosmology(spec=None, *, deferred: bool = False):
    """Build an astropy cosmology.

    Parameters
    ----------
    deferred : bool; True returns a `DeferredCosmology` for a built-in realisation named in
        `REALISATIONS` (astropy then loads when a distance is first needed)
    spec : None, str, dict or astropy Cosmology
        None (or an empty table) gives Planck18. A string names a realisation. A dict either has ``name`` (a
        realisation) or ``model`` (one of LambdaCDM, FlatLambdaCDM, wCDM, FlatwCDM, w0waCDM,
        Flatw0waCDM) with its parameters: H0 in km/s/Mpc, Om0, Ode0, w0, wa, and optionally
        Tcmb0 (K), Neff, Ob0, m_nu (eV). Without ``model``, a dict with Ode0 is LambdaCDM
        (w0waCDM when w0 or wa is given), without Ode0 it is flat.
    """
    if spec is None or (isinstance(spec, dict) and not spec):  # an empty [cosmology] table: the default
        spec = DEFAULT_COSMOLOGY
    if isinstance(spec, DeferredCosmology):
        return spec
    if isinstance(spec, dict) and "name" in spec:
        extra = set(spec) - {"name"}
        if extra:
            raise ConfigError(f"cosmology: 'name' cannot be combined with {sorted(extra)}")
        spec = spec["name"]
    if isinstance(spec, str):
        return DeferredCosmology(spec) if deferred and spec in REALISATIONS else _realisation(spec)
    if isinstance(spec, dict):
        return _parametric(dict(spec))
    if isinstance(spec, _cosmo.Cosmology):
        return spec
    raise ConfigError(f"cosmology: expected a name or a table, got {spec!r}")


def _realisation(name):
    valid = available_realisations()
    if name not in valid:
        raise ConfigError(f"cosmology: unknown realisation {name!r}; expected one of {', '.join(valid)}")
    return getattr(_cosmo, name)


def _parametric(spec):
    model = spec.pop("model", None)
    if model is None:
        dark = "w0waCDM" if ("w0" in spec or "wa" in spec) else "LambdaCDM"
        model = dark if "Ode0" in spec else "Flat" + dark
    if model not in _PARAMETRIC:
        raise ConfigError(f"cosmology: unknown model {model!r}; expected one of {', '.join(_PARAMETRIC)}")
    required = _PARAMETRIC[model]
    missing = [p for p in required if p not in spec]
    if missing:
        raise ConfigError(f"cosmology: model {model} needs {', '.join(missing)}")
    unknown = set(spec) - set(required) - set(_OPTIONAL)
    if unknown:
        raise ConfigError(f"cosmology: unknown parameter(s) {sorted(unknown)} for model {model}")
    kwargs = {key: _parameter(key, value) for key, value in spec.items()}
    if model.startswith("Flat") and kwargs["Om0"] > 1:
        raise ConfigError(f"cosmology.Om0: expected <= 1 for a flat model (Ode0 = 1 - Om0 >= 0), "
                          f"got {spec['Om0']!r}")
    if "Ob0" in kwargs and kwargs["Ob0"] > kwargs["Om0"]:
        raise ConfigError(f"cosmology.Ob0: expected <= Om0 ({spec['Om0']!r}), got {spec['Ob0']!r}")
    try:
        cosmo = getattr(_cosmo, model)(**kwargs)
    except (TypeError, ValueError) as exc:
        raise ConfigError(f"cosmology: {exc}") from None
    _check_expansion(cosmo, model)
    return cosmo


# Physical ranges of the parameters: (low, low excluded, high); None = unbounded.
_RANGES = {"H0": (0.0, True, None), "Om0": (0.0, False, None), "Ode0": (0.0, False, None),
           "Tcmb0": (0.0, False, None), "Neff": (0.0, False, None), "Ob0": (0.0, False, None),
           "w0": (None, False, None), "wa": (None, False, None)}



def _parameter(key, value):
    """One cosmological parameter: a finite number in its physical range, with its unit."""
    if key == "m_nu":
        values = value if isinstance(value, list) else [value]
        for item in values:
            validate.number(item, "cosmology.m_nu", low=0, unit="eV")
        return np.asarray(values, dtype=float) * u.eV
    low, low_open, high = _RANGES[key]
    number = validate.number(value, f"cosmology.{key}", low=low, low_open=low_open, high=high)
    units = {"H0": u.km / u.s / u.Mpc, "Tcmb0": u.K}
    return number * units[key] if key in units else number


def _check_expansion(cosmo, model):
    """H(z)^2 > 0 from today back to z = 1e4: no bounce or turnaround, so ages and distances exist
    (a closed model with too much dark energy fails here; de Sitter and Milne pass)."""
    import warnings

    z = np.concatenate([[0.0], np.geomspace(1e-3, 1e4, 400)])
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        e2 = np.asarray(cosmo.efunc(z), dtype=complex) ** 2
    if not (np.all(e2.real > 0) and np.all(np.abs(e2.imag) < 1e-12)):
        raise ConfigError(f"cosmology: the {model} model with Om0 = {cosmo.Om0:g}, Ode0 = {cosmo.Ode0:g} "
                          f"has no expansion history back to z = 1e4 (H(z)^2 <= 0 somewhere): "
                          f"ages and distances do not exist")


def scale_factor(z):
    """a = 1 / (1 + z)."""
    return 1.0 / (1.0 + np.asarray(z, dtype=float))


def age_gyr(cosmo, z):
    """Age of the Universe at redshift z, Gyr."""
    return np.asarray(cosmo.age(z).to_value(u.Gyr))


def lookback_gyr(cosmo, z):
    """Lookback time to redshift z, Gyr."""
    return np.asarray(cosmo.lookback_time(z).to_value(u.Gyr))


def luminosity_distance_mpc(cosmo, z):
    """Luminosity distance d_L, Mpc."""
    return np.asarray(cosmo.luminosity_distance(z).to_value(u.Mpc))


def luminosity_distance_cm(cosmo, z):
    """Luminosity distance d_L, cm."""
    return np.asarray(cosmo.luminosity_distance(z).to_value(u.cm))


def angular_diameter_distance_mpc(cosmo, z):
    """Angular-diameter distance D_A, Mpc."""
    return np.asarray(cosmo.angular_diameter_distance(z).to_value(u.Mpc))


def comoving_distance_mpc(cosmo, z):
    """Line-of-sight comoving distance D_C, Mpc."""
    return np.asarray(cosmo.comoving_distance(z).to_value(u.Mpc))


def comoving_volume_element(cosmo, z):
    """Differential comoving volume dV_c/dz/dOmega, Mpc^3 sr^-1."""
    return np.asarray(cosmo.differential_comoving_volume(z).to_value(u.Mpc**3 / u.sr))


def redshift_at_age(cosmo, age):
    """Redshift at which the Universe had the given age (Gyr).

    A scalar is solved exactly (astropy's z_at_value); an array is interpolated on a grid of 4000
    redshifts (relative error ~1e-4), which is far cheaper than one root-find per element.
    """
    if np.ndim(age) == 0:
        from astropy.cosmology import z_at_value

        return float(z_at_value(cosmo.age, float(age) * u.Gyr, zmin=1e-8, zmax=1e4).value)
    grid_z = np.geomspace(1e-5, 1e3, 4000)
    grid_age = age_gyr(cosmo, grid_z)
    return np.interp(np.asarray(age, dtype=float), grid_age[::-1], grid_z[::-1])


def describe(cosmo):
    """A short JSON-friendly description of a cosmology."""
    if isinstance(cosmo, DeferredCosmology):
        if cosmo._built is None:
            h0, om0, ode0, tcmb0 = REALISATIONS[cosmo.realisation]
            return {"name": cosmo.realisation, "class": "FlatLambdaCDM", "H0": h0, "Om0": om0,
                    "Ode0": ode0, "Tcmb0": tcmb0}
        cosmo = cosmo.build()
    desc = {"name": cosmo.name or type(cosmo).__name__, "class": type(cosmo).__name__,
            "H0": float(cosmo.H0.to_value(u.km / u.s / u.Mpc)), "Om0": float(cosmo.Om0),
            "Ode0": float(cosmo.Ode0), "Tcmb0": float(cosmo.Tcmb0.to_value(u.K))}
    for key in ("w0", "wa"):
        if hasattr(cosmo, key):
            desc[key] = float(getattr(cosmo, key))
    return desc
