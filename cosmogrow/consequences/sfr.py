"""The cosmic star-formation-rate density psi(z), comoving, in Msun yr^-1 Mpc^-3.

Two sources: the fit of Madau & Dickinson 2014 (ARA&A 52, 415, Eq. 15; Salpeter IMF 0.1-100 Msun),
and a user table of (z, psi) interpolated log-linearly (linear in z, geometric in psi) and zero
outside its redshift range.
"""

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import ConfigError, InputError

SFR_TABLE_COLUMNS = ("z", "psi")


def madau_dickinson_2014(z):
    """Comoving star-formation-rate density of Madau & Dickinson 2014, Eq. 15.

    psi(z) = 0.015 (1+z)^2.7 / [1 + ((1+z)/2.9)^5.6], for a Salpeter IMF over 0.1-100 Msun.

    Parameters
    ----------
    z : array_like, redshift (>= 0)

    Returns
    -------
    ndarray, Msun yr^-1 Mpc^-3 (comoving)
    """
    opz = 1.0 + np.asarray(z, dtype=float)
    return 0.015 * opz**2.7 / (1.0 + (opz / 2.9) ** 5.6)


@dataclass(frozen=True, eq=False)
class TabulatedSfr:
    """A star-formation-rate density given as a table, callable like `madau_dickinson_2014`.

    Between two nodes psi is interpolated geometrically (log psi linear in z); when one of the two
    nodes is zero the interpolation is linear instead. Outside [z[0], z[-1]] psi is zero.

    Attributes
    ----------
    z : ndarray, redshift nodes, strictly increasing, >= 0
    psi : ndarray, Msun yr^-1 Mpc^-3 (comoving), >= 0
    source : str, where the table came from
    """

    z: np.ndarray
    psi: np.ndarray
    source: str = field(default="table")

    def __post_init__(self):
        z = np.array(self.z, dtype=float)
        psi = np.array(self.psi, dtype=float)
        if z.ndim != 1 or z.shape != psi.shape or len(z) < 2:
            raise ConfigError(f"star-formation table: expected two equal 1-D columns of >= 2 rows, "
                              f"got shapes {z.shape} and {psi.shape}")
        if not (np.all(np.isfinite(z)) and np.all(np.isfinite(psi))):
            raise ConfigError("star-formation table: expected finite values")
        if np.any(np.diff(z) <= 0) or z[0] < 0 or np.any(psi < 0):
            raise ConfigError("star-formation table: expected increasing z >= 0 and psi >= 0")
        z.setflags(write=False)
        psi.setflags(write=False)
        object.__setattr__(self, "z", z)
        object.__setattr__(self, "psi", psi)

    def __call__(self, z):
        """psi at redshift z, Msun yr^-1 Mpc^-3; zero outside the table's range."""
        z = np.asarray(z, dtype=float)
        idx = np.clip(np.searchsorted(self.z, z, side="right") - 1, 0, len(self.z) - 2)
        z0, z1 = self.z[idx], self.z[idx + 1]
        p0, p1 = self.psi[idx], self.psi[idx + 1]
        frac = (z - z0) / (z1 - z0)
        both = (p0 > 0) & (p1 > 0)
        with np.errstate(divide="ignore", invalid="ignore"):
            geometric = p0 * np.power(np.where(both, p1 / np.where(both, p0, 1.0), 1.0), frac)
        linear = p0 + (p1 - p0) * frac
        out = np.where(both, geometric, linear)
        inside = (z >= self.z[0]) & (z <= self.z[-1])
        return np.where(inside, out, 0.0)

    def describe(self):
        """JSON-friendly summary."""
        return {"kind": "table", "source": self.source, "n_rows": len(self.z),
                "z_range": [float(self.z[0]), float(self.z[-1])]}


def read_sfr_table(path):
    """Read a star-formation table: CSV with columns ``z`` and ``psi`` (Msun yr^-1 Mpc^-3).

    Rows may come in any order; they are sorted by z. Lines starting with '#' are comments.

    Raises
    ------
    InputError
        Naming the file, the 1-based data row, the column and the value, for a missing column,
        a non-numeric, non-finite or negative value, a negative or repeated redshift, or fewer
        than two rows.
    """
    import pandas as pd

    path = Path(path)
    try:
        frame = pd.read_csv(path, dtype=str, keep_default_na=False, comment="#", skipinitialspace=True)
    except FileNotFoundError:
        raise InputError(path, "file not found") from None
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as exc:
        raise InputError(path, f"cannot read as CSV ({exc})") from None
    frame.columns = [str(c).strip() for c in frame.columns]
    for name in SFR_TABLE_COLUMNS:
        if name not in frame.columns:
            raise InputError(path, f"missing column; expected columns {', '.join(SFR_TABLE_COLUMNS)}, "
                                   f"got {', '.join(frame.columns)}", column=name)
    values = {}
    for name in SFR_TABLE_COLUMNS:
        column = np.empty(len(frame))
        for row, raw in enumerate(frame[name], start=1):
            try:
                number = float(raw)
            except ValueError:
                raise InputError(path, "expected a number", row=row, column=name, value=raw) from None
            if not np.isfinite(number) or number < 0:
                raise InputError(path, "expected a finite value >= 0", row=row, column=name, value=raw)
            column[row - 1] = number
        values[name] = column
    if len(frame) < 2:
        raise InputError(path, f"expected at least 2 data rows, got {len(frame)}")
    order = np.argsort(values["z"], kind="stable")
    z_sorted = values["z"][order]
    repeated = np.flatnonzero(np.diff(z_sorted) == 0)
    if repeated.size:
        row = int(order[repeated[0] + 1]) + 1
        raise InputError(path, "redshift repeated; expected one row per redshift", row=row,
                         column="z", value=float(z_sorted[repeated[0]]))
    return TabulatedSfr(z=z_sorted, psi=values["psi"][order], source=str(path))


def get_sfr(spec=None):
    """Resolve a star-formation-rate density.

    Parameters
    ----------
    spec : None, "madau_dickinson_2014", a path to a CSV table, or a callable psi(z)

    Returns
    -------
    callable z -> psi (Msun yr^-1 Mpc^-3)
    """
    if spec is None or spec == "madau_dickinson_2014":
        return madau_dickinson_2014
    if callable(spec):
        return spec
    return read_sfr_table(spec)


def describe_sfr(sfr):
    """JSON-friendly description of a star-formation-rate density."""
    if sfr is madau_dickinson_2014:
        return {"kind": "madau_dickinson_2014",
                "reference": "Madau & Dickinson 2014, ARA&A 52, 415, Eq. 15 (Salpeter IMF 0.1-100 Msun)"}
    if isinstance(sfr, TabulatedSfr):
        return sfr.describe()
    return {"kind": "callable", "name": getattr(sfr, "__name__", repr(sfr))}
