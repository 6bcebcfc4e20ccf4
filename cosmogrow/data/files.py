"""Opening catalogue files: formats by extension, Parquet dictionary columns, headers, column shapes.

`read_table` turns a CSV, TSV, ECSV, FITS or Parquet file into an astropy Table, or raises an
InputError naming the file (and column) for anything that is not a table of one value per cell:
a directory, an unreadable file, a header naming a column twice, a Parquet column of lists.
A UTF-8 byte-order mark is removed from the first column name; a NaN in FITS stays a NaN.
"""

import warnings

import pandas as pd

from ..errors import InputError

FORMATS = {".csv": "ascii.csv", ".tsv": "ascii.tab", ".tab": "ascii.tab", ".ecsv": "ascii.ecsv",
           ".fits": "fits", ".fit": "fits", ".fits.gz": "fits", ".parquet": "parquet"}


def format_of(path):
    name = path.name.lower()
    for suffix in sorted(FORMATS, key=len, reverse=True):
        if name.endswith(suffix):
            return suffix, FORMATS[suffix]
    raise InputError(path, f"expected a file ending in one of {', '.join(FORMATS)}")


def read_table(path, id_name):
    """The file as an astropy Table (bytes decoded; text ids kept as text) and the file's stem."""
    from astropy.table import Table

    suffix, fmt = format_of(path)
    if path.is_dir():
        raise InputError(path, "is a directory; expected a catalogue file")
    if not path.is_file():
        raise InputError(path, "expected an existing file; no such file")
    kwargs = {"comment": "#"} if fmt in ("ascii.csv", "ascii.tab") else {}
    if fmt == "fits":
        kwargs = {"mask_invalid": False}  # a NaN in FITS is a NaN, not an empty cell
    try:
        if fmt == "parquet":
            table = _read_parquet(path)
        else:
            table = Table.read(path, format=fmt, **kwargs)
        if fmt.startswith("ascii") and id_name in table.colnames and table[id_name].dtype.kind not in "US":
            # numeric-looking ids ("007"): read again keeping them as text (slower pure-Python reader)
            table = Table.read(path, format=fmt, converters={id_name: str}, **kwargs)
    except (OSError, ValueError, TypeError, KeyError, ImportError, UnicodeDecodeError) as exc:
        first_line = (str(exc).strip().splitlines() or [type(exc).__name__])[0]
        raise InputError(path, f"expected a readable {fmt} table; {first_line}") from exc
    if table.colnames and table.colnames[0].startswith("\ufeff"):  # UTF-8 byte-order mark
        table.rename_column(table.colnames[0], table.colnames[0].lstrip("\ufeff"))
    table.convert_bytestring_to_unicode()
    if fmt in ("ascii.csv", "ascii.tab"):
        _check_header(path, "," if fmt == "ascii.csv" else "\t")
    return table, path.name[: -len(suffix)]


def _read_parquet(path):
    """A Parquet file as an astropy Table; dictionary (categorical) columns decoded to their values.

    Files without dictionary columns go through astropy (which keeps its unit metadata).
    """
    import pyarrow as pa
    import pyarrow.parquet as pq
    from astropy.table import Table

    schema = pq.read_schema(path)
    for field in schema:
        if pa.types.is_list(field.type) or pa.types.is_large_list(field.type) or pa.types.is_struct(field.type) \
                or pa.types.is_map(field.type) or pa.types.is_fixed_size_list(field.type):
            raise InputError(path, f"expected one value per row; the column holds {field.type}",
                             column=field.name)
    if not any(pa.types.is_dictionary(field.type) for field in schema):
        with warnings.catch_warnings():  # Parquet files not written by astropy lack string lengths
            warnings.filterwarnings("ignore", message="No table::len::")
            return Table.read(path, format="parquet")
    frame = pq.read_table(path).to_pandas()
    for name in frame.columns:
        if isinstance(frame[name].dtype, pd.CategoricalDtype):
            frame[name] = frame[name].astype(object)
    return Table.from_pandas(frame)


def _check_header(path, delimiter):
    """A column name written twice in a CSV/TSV header is refused (the reader would rename one)."""
    import csv

    with open(path, encoding="utf-8-sig", errors="replace", newline="") as handle:
        for line in handle:
            if line.strip() and not line.lstrip().startswith("#"):
                names = [name.strip() for name in next(csv.reader([line], delimiter=delimiter))]
                break
        else:
            return
    seen = set()
    for name in names:
        if name in seen:
            raise InputError(path, "the header names this column twice; expected each column once",
                             column=name)
        seen.add(name)


def check_scalar(table, source, path):
    """One value per row: a column of vectors (FITS, ECSV) is refused."""
    shape = getattr(table[source], "shape", ())
    if len(shape) > 1:
        raise InputError(path, f"expected one value per row; the column holds arrays of shape "
                         f"{tuple(shape[1:])}", column=source)


def check_redshift_unit(column, source, path):
    """A redshift has no unit (or astropy's redshift unit); a length or velocity is refused."""
    unit = getattr(column, "unit", None)
    if unit is None:  # text formats: nothing to check, and no need to import astropy
        return
    import astropy.cosmology.units as cu
    import astropy.units as u

    if unit not in (u.dimensionless_unscaled, cu.redshift):
        raise InputError(path, f"expected a dimensionless redshift, got a column in {unit}", column=source)
