"""The catalogue: black-hole and host masses of one or more samples, validated once.

`Catalog` is the in-memory form every other module uses; `read_catalog` (in `catalog_io`) builds it
from a file. Columns of the standard format (all logs base 10, masses in solar masses):

id, z, log_mbh, log_mbh_err [dex], log_mstar, log_mstar_err [dex], sample, method

and two optional label columns: host_type (e.g. quiescent, agn; hosts of different types sit at
different M_BH/M_* and get offsets like mass methods) and source (the compilation a row came from,
for the leave-one-source-out null test). Both default to "unspecified".
"""

from dataclasses import dataclass, field

import numpy as np

STANDARD_COLUMNS = ("id", "z", "log_mbh", "log_mbh_err", "log_mstar", "log_mstar_err", "sample", "method")
#: Optional label columns: written only when some row has a value other than the default.
OPTIONAL_LABELS = ("host_type", "source")
NUMERIC_COLUMNS = ("z", "log_mbh", "log_mbh_err", "log_mstar", "log_mstar_err")
DEFAULT_METHOD = "unspecified"
DEFAULT_HOST_TYPE = "unspecified"
DEFAULT_SOURCE = "unspecified"


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
    host_type : ndarray of str, host type (quiescent, agn, ...); "unspecified" when not given
    source : ndarray of str, the compilation each row came from; "unspecified" when not given
    files : tuple of str, where the rows were read from (file paths or descriptions)
    """

    ids: np.ndarray
    z: np.ndarray
    log_mbh: np.ndarray
    log_mbh_err: np.ndarray
    log_mstar: np.ndarray
    log_mstar_err: np.ndarray
    sample: np.ndarray
    method: np.ndarray
    host_type: np.ndarray = None
    source: np.ndarray = None
    files: tuple = field(default=())

    def __post_init__(self):
        n = len(self.z)
        for name, default in (("host_type", DEFAULT_HOST_TYPE), ("source", DEFAULT_SOURCE)):
            if getattr(self, name) is None:
                object.__setattr__(self, name, np.full(n, default, dtype=object))
        for name in STANDARD_COLUMNS + OPTIONAL_LABELS:
            attr = "ids" if name == "id" else name
            arr = getattr(self, attr)
            if len(arr) != n:
                raise ValueError(f"Catalog: column {name} has {len(arr)} rows, expected {n}")
            arr.setflags(write=False)

    @classmethod
    def from_columns(cls, *, z, log_mbh, log_mbh_err, log_mstar, log_mstar_err,
                     sample, method=None, host_type=None, source=None, ids=None, files=()):
        """Build a Catalog from array-likes; scalars for sample, method, host_type, source broadcast."""
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
                   host_type=strings(host_type, DEFAULT_HOST_TYPE), source=strings(source, DEFAULT_SOURCE),
                   files=tuple(files))

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

    @property
    def host_type_names(self):
        """Host-type labels in order of first appearance."""
        return tuple(dict.fromkeys(self.host_type.tolist()))

    @property
    def source_names(self):
        """Source (compilation) labels in order of first appearance."""
        return tuple(dict.fromkeys(self.source.tolist()))

    @property
    def label_columns(self):
        """Column names to write: the standard ones, plus optional labels that carry information."""
        extra = tuple(name for name, default in zip(OPTIONAL_LABELS, (DEFAULT_HOST_TYPE, DEFAULT_SOURCE))
                      if np.any(getattr(self, name) != default))
        return STANDARD_COLUMNS + extra

    def subset(self, mask):
        """Rows selected by a boolean mask or an index array."""
        cols = {name: getattr(self, name)[mask] for name in _ATTRS}
        return Catalog(**cols, files=self.files)

    def replace(self, **columns):
        """A copy with some columns replaced (e.g. redrawn log_mbh)."""
        cols = {name: np.array(getattr(self, name)) for name in _ATTRS}
        for name, value in columns.items():
            if name not in cols:
                raise ValueError(f"Catalog.replace: unknown column {name!r}")
            cols[name] = np.array(value, dtype=cols[name].dtype)
        return Catalog(**cols, files=self.files)

    @classmethod
    def concat(cls, catalogs):
        """Rows of several catalogues, in order."""
        catalogs = list(catalogs)
        cols = {name: np.concatenate([getattr(c, name) for c in catalogs]) for name in _ATTRS}
        files = tuple(s for c in catalogs for s in c.files)
        return cls(**cols, files=files)

    def to_dataframe(self):
        """A pandas DataFrame with the standard column names."""
        import pandas as pd

        return pd.DataFrame({name: np.asarray(getattr(self, "ids" if name == "id" else name))
                             for name in self.label_columns})


_ATTRS = ("ids", "z", "log_mbh", "log_mbh_err", "log_mstar", "log_mstar_err", "sample", "method",
          "host_type", "source")
