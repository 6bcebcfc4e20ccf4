"""Catalogues held in memory: pandas DataFrames validated exactly as catalogue files are.

`read_frame` checks one DataFrame like `readers.read_catalog` checks a file (messages name the frame,
row, column and value); a `FrameSource` stands where a file path would in a run configuration, so a
notebook fit goes through the same reading, duplicate-id and provenance code as `cosmogrow fit`.
"""

import hashlib

import pandas as pd

from ..errors import ConfigError
from .catalog import Catalog
from .readers import catalog_from_table


class FrameSource:
    """An in-memory catalogue (a pandas DataFrame) standing where a catalogue file would."""

    def __init__(self, name: str, frame):
        self.name = name
        self.frame = frame

    def __str__(self):
        return f"DataFrame '{self.name}'"

    def load(self, *, sample=None, column_map=None, drop_invalid=False, default_method=None):
        """(catalog, dropped rows, 1-based rows kept), like reading a file."""
        return _frame_catalog(self.frame, sample if sample is not None else self.name,
                              column_map=column_map, drop_invalid=drop_invalid,
                              default_method=default_method)

    def sha256(self) -> str:
        """A digest of the frame's contents (index and values)."""
        return hashlib.sha256(pd.util.hash_pandas_object(self.frame, index=True).values.tobytes()).hexdigest()


def read_frame(frame, *, sample: str, column_map: dict | None = None, drop_invalid: bool = False,
               default_method: str | None = None) -> tuple[Catalog, list]:
    """Validate a pandas DataFrame as one catalogue, exactly as `read_catalog` validates a file.

    Parameters
    ----------
    frame : pandas.DataFrame
        Columns of the catalogue format (id, z, log_mbh, log_mbh_err [dex], log_mstar,
        log_mstar_err [dex], and optionally sample, method, host_type, source).
    sample : str
        Sample label for rows without a ``sample`` column; also names the frame in messages.
    column_map, drop_invalid, default_method : as for `read_catalog`.

    Returns
    -------
    catalog : Catalog;  report : list of dict (dropped rows, as for `read_catalog`)
    """
    catalog, report, _ = _frame_catalog(frame, sample, column_map=column_map, drop_invalid=drop_invalid,
                                        default_method=default_method)
    return catalog, report


def _frame_catalog(frame, sample, **options):
    from astropy.table import Table

    if not isinstance(frame, pd.DataFrame):
        raise ConfigError(f"sample '{sample}': expected a pandas DataFrame, got {type(frame).__name__}")
    frame = frame.reset_index(drop=True)
    for name in frame.columns:
        if frame[name].dtype == object:  # text columns (ids, labels): missing cells become empty
            frame[name] = frame[name].astype(str).where(frame[name].notna(), "")
    return catalog_from_table(Table.from_pandas(frame), f"DataFrame '{sample}'", sample, sample=sample, **options)
