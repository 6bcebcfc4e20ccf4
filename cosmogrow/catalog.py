"""The catalogue: black-hole and host masses of one or more samples, validated once.

`Catalog` is the in-memory form every other module uses; `read_catalog` (in `catalog_io`) builds it
from a file. Columns of the standard format (all logs base 10, masses in solar masses):

id, z, log_mbh, log_mbh_err [dex], log_mstar, log_mstar_err [dex], sample, method
"""

from dataclasses import dataclass, field

import numpy as np

STANDARD_COLUMNS = ("id", "z", "log_mbh", "log_mbh_err", "log_mstar", "log_mstar_err", "sample", "method")
NUMERIC_COLUMNS = ("z", "log_mbh", "log_mbh_err", "log_mstar", "log_mstar_err")
DEFAULT_METHOD = "unspecified"


@dataclass(frozen=True, eq=False)
class Catalog:
    """Objects of one or more samples.

    Attributes
    ----------
    ids : ndarray of str
    z : ndarray, redshift
    log_mbh, log_mbh_err : ndarray, log10 Msun and dex
    log_mstar, log_mstar_err : ndarray, log10 Msun and dex
    sample : ndarray of str, sample label
    method : ndarray of str, black-hole mass method (dynamical, reverberation, virial, ...)
    sources : tuple of str, where the rows came from (file paths or descriptions)
    """

    ids: np.ndarray
    z: np.ndarray
    log_mbh: np.ndarray
    log_mbh_err: np.ndarray
    log_mstar: np.ndarray
    log_mstar_err: np.ndarray
    sample: np.ndarray
    method: np.ndarray
    sources: tuple = field(default=())

    def __post_init__(self):
        n = len(self.z)
        for name in STANDARD_COLUMNS:
            attr = "ids" if name == "id" else name
            arr = getattr(self, attr)
            if len(arr) != n:
                raise ValueError(f"Catalog: column {name} has {len(arr)} rows, expected {n}")
            arr.setflags(write=False)

    @classmethod
    def from_columns(cls, *, z, log_mbh, log_mbh_err, log_mstar, log_mstar_err,
                     sample, method=None, ids=None, sources=()):
        """Build a Catalog from array-likes; scalars for sample/method broadcast."""
        z = np.array(z, dtype=float)
        n = len(z)

        def strings(value, default):
            if value is None:
                value = default
            if isinstance(value, str):
                return np.full(n, value, dtype=object)
            return np.array([str(v) for v in value], dtype=object)

        if ids is None:
            ids = [f"obj{i + 1:06d}" for i in range(n)]
        return cls(ids=strings(ids, None), z=z,
                   log_mbh=np.array(log_mbh, dtype=float), log_mbh_err=np.array(log_mbh_err, dtype=float),
                   log_mstar=np.array(log_mstar, dtype=float),
                   log_mstar_err=np.array(log_mstar_err, dtype=float),
                   sample=strings(sample, None), method=strings(method, DEFAULT_METHOD),
                   sources=tuple(sources))

    def __len__(self):
        return len(self.z)

    @property
    def sample_names(self):
        """Sample labels in order of first appearance."""
        return tuple(dict.fromkeys(self.sample.tolist()))

    @property
    def method_names(self):
        """Mass-method labels in order of first appearance."""
        return tuple(dict.fromkeys(self.method.tolist()))

    def subset(self, mask):
        """Rows selected by a boolean mask or an index array."""
        cols = {name: getattr(self, name)[mask] for name in _ATTRS}
        return Catalog(**cols, sources=self.sources)

    def replace(self, **columns):
        """A copy with some columns replaced (e.g. redrawn log_mbh)."""
        cols = {name: np.array(getattr(self, name)) for name in _ATTRS}
        for name, value in columns.items():
            if name not in cols:
                raise ValueError(f"Catalog.replace: unknown column {name!r}")
            cols[name] = np.array(value, dtype=cols[name].dtype)
        return Catalog(**cols, sources=self.sources)

    @classmethod
    def concat(cls, catalogs):
        """Rows of several catalogues, in order."""
        catalogs = list(catalogs)
        cols = {name: np.concatenate([getattr(c, name) for c in catalogs]) for name in _ATTRS}
        sources = tuple(s for c in catalogs for s in c.sources)
        return cls(**cols, sources=sources)

    def to_dataframe(self):
        """A pandas DataFrame with the standard column names."""
        import pandas as pd

        return pd.DataFrame({name: np.asarray(getattr(self, "ids" if name == "id" else name))
                             for name in STANDARD_COLUMNS})


_ATTRS = ("ids", "z", "log_mbh", "log_mbh_err", "log_mstar", "log_mstar_err", "sample", "method")
