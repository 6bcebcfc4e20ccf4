"""The stellar-remnant test: coupled growth must not make a black hole's birth mass too small.

A black hole seen at z_obs with mass M_obs that grew as a^k since it formed at z_form was born with

    M_birth = M_obs × r^k,   r = (1 + z_obs) / (1 + z_form) < 1.

A black hole cannot be born below the maximum mass of a neutron star (default 2.2 Msun: Rezzolla
et al. 2018 give 2.16 +0.17/-0.15 Msun for the maximum non-rotating mass), so large k are ruled out.

Mass errors are Gaussian in mass: the present true mass is taken as N(M_obs, mass_err^2) (a flat
prior on mass), so P(M_birth > L) = Φ((M_obs - L r^-k) / mass_err), a step when mass_err = 0.
Objects are independent: the joint probability that every birth mass exceeds L is the product.
It decreases with k, so "the largest k at 95 %" is the root of joint(k) = 0.95 (brentq); the
per-object value has the closed form k_i = ln((M_obs - 1.645 mass_err) / L) / ln(1/r).
"""

from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy import optimize, stats

from ..background import age_gyr, redshift_at_age
from ..errors import ConfigError, InputError

DEFAULT_LIMIT = 2.2  # Msun, approximate maximum neutron-star mass (Rezzolla et al. 2018)
DEFAULT_CONFIDENCE = 0.95
REQUIRED_COLUMNS = ("mass", "mass_err")
FORMATION_COLUMNS = ("z_form", "age_gyr")


@dataclass(frozen=True, eq=False)
class RemnantCatalog:
    """Stellar-mass black holes with a formation epoch.

    Attributes
    ----------
    ids : ndarray of str
    mass, mass_err : ndarray, Msun, measured present mass and its 1-sigma error
    z_obs : ndarray, redshift at which the mass is measured
    z_form : ndarray, formation redshift (> z_obs)
    age_gyr : ndarray, Gyr, system age when given (NaN where z_form was given)
    formation_from : ndarray of str, 'z_form' or 'age_gyr'
    source : str
    """

    ids: np.ndarray
    mass: np.ndarray
    mass_err: np.ndarray
    z_obs: np.ndarray
    z_form: np.ndarray
    age_gyr: np.ndarray
    formation_from: np.ndarray
    source: str = ""

    def __post_init__(self):
        n = len(self.mass)
        for name in ("ids", "mass_err", "z_obs", "z_form", "age_gyr", "formation_from"):
            if len(getattr(self, name)) != n:
                raise ValueError(f"RemnantCatalog: column {name} has {len(getattr(self, name))} rows, expected {n}")
            getattr(self, name).setflags(write=False)

    def __len__(self):
        return len(self.mass)

    @property
    def growth_ratio(self):
        """r = (1 + z_obs) / (1 + z_form) = a_form / a_obs, below 1."""
        return (1.0 + self.z_obs) / (1.0 + self.z_form)


#: Redshift limits: catalogues go to z = 20 (as the black-hole catalogues); the first stars form at
#: z of a few tens (common practice), so a formation redshift above 30 is a unit or typing error.
Z_OBS_MAX = 20.0
Z_FORM_MAX = 30.0


def _read_cells(path):
    """Column names and raw cells (str, or '' when empty/masked) of a CSV or ECSV file."""
    path = Path(path)
    if path.is_dir():
        raise InputError(path, "is a directory; expected a CSV or ECSV file")
    if not path.is_file():
        raise InputError(path, "file not found")
    if path.suffix.lower() == ".ecsv":
        from astropy.table import Table

        try:
            table = Table.read(path, format="ascii.ecsv")
        except Exception as exc:  # astropy raises many types for a malformed ECSV
            raise InputError(path, f"cannot read as ECSV ({exc})") from None
        cells = {}
        for name in table.colnames:
            column = table[name]
            mask = np.ma.getmaskarray(column) if hasattr(column, "mask") else np.zeros(len(column), bool)
            cells[name.strip()] = ["" if m else str(v) for v, m in zip(np.asarray(column), mask)]
        return list(cells), cells, len(table)
    import pandas as pd

    try:
        frame = pd.read_csv(path, dtype=str, keep_default_na=False, comment="#", skipinitialspace=True,
                            encoding="utf-8-sig")
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as exc:
        raise InputError(path, f"cannot read as CSV ({exc})") from None
    frame.columns = [str(c).strip() for c in frame.columns]
    if len(set(frame.columns)) != len(frame.columns) or any(c.rsplit(".", 1)[0] in frame.columns
                                                             and c.rsplit(".", 1)[-1].isdigit()
                                                             for c in frame.columns):
        doubled = next(c.rsplit(".", 1)[0] for c in frame.columns if c.rsplit(".", 1)[-1].isdigit())
        raise InputError(path, "the header names this column twice; expected each column once", column=doubled)
    return list(frame.columns), {c: [s.strip() for s in frame[c]] for c in frame.columns}, len(frame)


def _number(path, raw, row, column, *, minimum=None, strict=False, maximum=None):
    try:
        value = float(raw)
    except ValueError:
        raise InputError(path, "expected a number", row=row, column=column, value=raw) from None
    if not np.isfinite(value):
        raise InputError(path, "expected a finite number", row=row, column=column, value=raw)
    if minimum is not None and (value <= minimum if strict else value < minimum):
        relation = ">" if strict else ">="
        raise InputError(path, f"expected a value {relation} {minimum}", row=row, column=column, value=raw)
    if maximum is not None and value > maximum:
        raise InputError(path, f"expected a value <= {maximum:g}", row=row, column=column, value=raw)
    return value


def read_remnants(path, cosmo):
    """Read a catalogue of stellar-mass black holes (CSV, or ECSV by its suffix).

    Columns: ``mass`` (Msun, > 0) and ``mass_err`` (Msun, >= 0), required; ``id`` (default
    'bh<row>'); ``z_obs`` (default 0); and per row exactly one of ``z_form`` (> z_obs) or
    ``age_gyr`` (system age, Gyr; the formation redshift is where the Universe was
    age(z_obs) - age_gyr old). Other columns are ignored.

    Raises
    ------
    InputError
        Naming the file, the 1-based data row, the column and the value.
    """
    path = Path(path)
    names, cells, n = _read_cells(path)
    for name in REQUIRED_COLUMNS:
        if name not in names:
            raise InputError(path, f"missing column; expected {', '.join(REQUIRED_COLUMNS)} and one of "
                                   f"{', '.join(FORMATION_COLUMNS)}, got {', '.join(names)}", column=name)
    if not any(name in names for name in FORMATION_COLUMNS):
        raise InputError(path, f"missing formation epoch; expected a column {FORMATION_COLUMNS[0]} or "
                               f"{FORMATION_COLUMNS[1]}, got {', '.join(names)}", column=FORMATION_COLUMNS[0])
    if n == 0:
        raise InputError(path, "no data rows")
    empty = [""] * n
    ids, mass, mass_err = [], np.empty(n), np.empty(n)
    z_obs, z_form, ages, origin = np.zeros(n), np.full(n, np.nan), np.full(n, np.nan), []
    for i in range(n):
        row = i + 1
        ids.append(cells["id"][i] if "id" in cells and cells["id"][i] else f"bh{row}")
        mass[i] = _number(path, cells["mass"][i], row, "mass", minimum=0.0, strict=True)
        mass_err[i] = _number(path, cells["mass_err"][i], row, "mass_err", minimum=0.0)
        if "z_obs" in cells and cells["z_obs"][i]:
            z_obs[i] = _number(path, cells["z_obs"][i], row, "z_obs", minimum=0.0, maximum=Z_OBS_MAX)
        given = [c for c in FORMATION_COLUMNS if cells.get(c, empty)[i]]
        if len(given) != 1:
            got = "both" if given else "neither"
            raise InputError(path, f"expected exactly one of z_form or age_gyr, got {got}", row=row,
                             column=FORMATION_COLUMNS[0])
        origin.append(given[0])
        if given[0] == "z_form":
            z_form[i] = _number(path, cells["z_form"][i], row, "z_form", minimum=0.0, maximum=Z_FORM_MAX)
            if z_form[i] <= z_obs[i]:
                raise InputError(path, f"expected z_form greater than z_obs = {z_obs[i]} (a system forms "
                                       "before it is observed)", row=row, column="z_form", value=cells["z_form"][i])
        else:
            ages[i] = _number(path, cells["age_gyr"][i], row, "age_gyr", minimum=0.0, strict=True)
            age_then = float(age_gyr(cosmo, z_obs[i]))
            if ages[i] >= age_then:
                raise InputError(path, f"expected an age below the age of the Universe at z_obs "
                                       f"({age_then:.4g} Gyr)", row=row, column="age_gyr", value=cells["age_gyr"][i])
    from_age = np.array([o == "age_gyr" for o in origin])
    if np.any(from_age):
        formation_age = np.atleast_1d(age_gyr(cosmo, z_obs[from_age])) - ages[from_age]
        z_form[from_age] = np.atleast_1d(redshift_at_age(cosmo, formation_age))
    return RemnantCatalog(ids=np.array(ids, dtype=object), mass=mass, mass_err=mass_err, z_obs=z_obs,
                          z_form=z_form, age_gyr=ages, formation_from=np.array(origin, dtype=object),
                          source=str(path))


def birth_mass(mass, z_obs, z_form, k):
    """Birth mass M_obs ((1 + z_obs) / (1 + z_form))^k, Msun.

    Parameters
    ----------
    mass : array_like, Msun, present mass (n objects)
    z_obs, z_form : array_like, redshifts (n objects)
    k : float or array_like, coupling exponent(s)

    Returns
    -------
    ndarray of shape np.shape(k) + (n,)
    """
    ratio = (1.0 + np.asarray(z_obs, dtype=float)) / (1.0 + np.asarray(z_form, dtype=float))
    k = np.asarray(k, dtype=float)[..., None]
    return np.asarray(mass, dtype=float) * ratio**k


def _check_limit(limit, confidence=DEFAULT_CONFIDENCE):
    if not (np.isfinite(limit) and limit > 0):
        raise ConfigError(f"limit: expected a positive mass in Msun, got {limit}")
    if not 0 < confidence < 1:
        raise ConfigError(f"confidence: expected a probability in (0, 1), got {confidence}")


def prob_above_limit(catalog, k, limit=DEFAULT_LIMIT):
    """Probability that each birth mass exceeds `limit` (Msun); shape np.shape(k) + (n,)."""
    _check_limit(limit)
    threshold = limit * catalog.growth_ratio ** (-np.asarray(k, dtype=float)[..., None])
    with np.errstate(divide="ignore", invalid="ignore"):
        score = (catalog.mass - threshold) / catalog.mass_err
    exact = np.where(catalog.mass >= threshold, 1.0, 0.0)
    return np.where(catalog.mass_err > 0, stats.norm.cdf(score), exact)


def joint_probability(catalog, k, limit=DEFAULT_LIMIT):
    """Probability that every birth mass exceeds `limit`: product over objects; shape np.shape(k)."""
    return np.prod(prob_above_limit(catalog, k, limit), axis=-1)


def k_max_per_object(catalog, limit=DEFAULT_LIMIT, confidence=DEFAULT_CONFIDENCE):
    """Largest k at which each object's birth mass exceeds `limit` with probability >= `confidence`.

    k_i = ln((M_obs - z_c mass_err) / L) / ln(1 / r), z_c the standard-normal `confidence` quantile;
    -inf when M_obs - z_c mass_err <= 0 (no k reaches the confidence).
    """
    _check_limit(limit, confidence)
    reach = catalog.mass - stats.norm.ppf(confidence) * catalog.mass_err
    with np.errstate(divide="ignore", invalid="ignore"):
        k_i = np.log(reach / limit) / np.log(1.0 / catalog.growth_ratio)
    return np.where(reach > 0, k_i, -np.inf)


def k_max_joint(catalog, limit=DEFAULT_LIMIT, confidence=DEFAULT_CONFIDENCE):
    """Largest k at which the joint probability is >= `confidence`; -inf when no k reaches it.

    The joint probability falls with k and is at most each object's probability, so the answer is
    at most min_i k_i (`k_max_per_object`); it is found by brentq below that bound.
    """
    _check_limit(limit, confidence)
    def excess(k):
        return float(joint_probability(catalog, k, limit)) - confidence

    # As k -> -inf every threshold -> 0: the joint probability tends to prod Φ(M / mass_err).
    with np.errstate(divide="ignore"):
        ceiling = np.prod(np.where(catalog.mass_err > 0,
                                   stats.norm.cdf(catalog.mass / catalog.mass_err), 1.0))
    if ceiling < confidence:
        return -np.inf
    k_hi = float(np.min(k_max_per_object(catalog, limit, confidence)))
    if excess(k_hi) >= 0:
        return k_hi
    step = 1.0
    k_lo = k_hi - step
    while excess(k_lo) < 0:
        step *= 2.0
        k_lo = k_hi - step
        if step > 1e6:
            return -np.inf
    return float(optimize.brentq(excess, k_lo, k_hi, xtol=1e-10, rtol=1e-12))


def posterior_probabilities(catalog, k_samples, limit=DEFAULT_LIMIT):
    """Probabilities averaged over a chain of k: per object, and the joint (mean of the product).

    Returns
    -------
    dict: p_above_limit (n,), joint_probability (float), birth_mass_median / _p16 / _p84 (n,), Msun
    """
    k_samples = np.asarray(k_samples, dtype=float).ravel()
    per_k = prob_above_limit(catalog, k_samples, limit)
    births = birth_mass(catalog.mass, catalog.z_obs, catalog.z_form, k_samples)
    return {"p_above_limit": per_k.mean(axis=0), "joint_probability": float(np.prod(per_k, axis=1).mean()),
            "birth_mass_median": np.median(births, axis=0),
            "birth_mass_p16": np.percentile(births, 16, axis=0),
            "birth_mass_p84": np.percentile(births, 84, axis=0)}
