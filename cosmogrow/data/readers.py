"""Reading and writing catalogue files: CSV, TSV, ECSV, FITS and Parquet, validated row by row.

Files are parsed by astropy.table (no hand-written parsers). The standard columns are those of
`cosmogrow.data.catalog`; the `columns` table of a sample
(`column_map` here) renames a file's own names. Every bad value is reported with the
file, the 1-based data row, the column (as named in the file) and the value: missing file or column,
unknown extension, empty cell, non-numeric, NaN/inf, z outside [0, 20], uncertainty <= 0, log mass
outside [0, 13] (with a hint for linear masses), duplicate id. Rows are dropped only with
``drop_invalid=True``, and then each one is listed in the returned report.
"""

from pathlib import Path

import numpy as np
import pandas as pd

from .catalog import (DEFAULT_HOST_TYPE, DEFAULT_METHOD, DEFAULT_SOURCE, OPTIONAL_LABELS, STANDARD_COLUMNS,
                      Catalog)
from ..errors import ConfigError, InputError
from .files import check_redshift_unit, check_scalar, format_of, read_table

# Linear-mass alternatives to the log columns; they must carry an astropy mass unit.
LINEAR_COLUMNS = {"mbh": "log_mbh", "mbh_err": "log_mbh_err",
                  "mstar": "log_mstar", "mstar_err": "log_mstar_err"}
MAP_TARGETS = STANDARD_COLUMNS + OPTIONAL_LABELS + tuple(LINEAR_COLUMNS)
READ_OPTIONS = ("sample", "column_map", "drop_invalid", "default_method")
Z_RANGE = (0.0, 20.0)
LOG_MASS_RANGE = (0.0, 13.0)
LINEAR_HINT = 1e3  # a "log mass" above this is almost certainly a linear mass


def _column_names(table, column_map, path):
    """{standard or linear name: file column name} after applying `column_map` (file -> standard)."""
    column_map = dict(column_map or {})
    unknown = sorted(set(column_map.values()) - set(MAP_TARGETS))
    if unknown:
        raise ConfigError(f"columns: unknown target column(s) {', '.join(map(repr, unknown))}; "
                          f"expected one of {', '.join(MAP_TARGETS)}")
    targets = list(column_map.values())
    doubled = sorted({t for t in targets if targets.count(t) > 1})
    if doubled:
        raise ConfigError(f"columns: several columns map to {doubled[0]!r}; expected at most one")
    absent = [source for source in column_map if source not in table.colnames]
    if absent:
        raise InputError(path, f"missing column; columns maps {absent[0]!r} to {column_map[absent[0]]!r}; "
                         f"file has {', '.join(table.colnames)}", column=absent[0])
    names = {name: name for name in table.colnames if name not in column_map}
    names.update({target: source for source, target in column_map.items()})  # mapped names win
    return names


def _resolve(table, names, name, path):
    """The key (`name` or its linear alternative) present in the file, and the file's column name."""
    linear = {v: k for k, v in LINEAR_COLUMNS.items()}.get(name)
    present = [key for key in (name, linear) if key in names]
    if len(present) == 2:  # a column_map target wins over a file's own name; else the log column
        mapped = [key for key in present if names[key] != key]
        if len(mapped) == 2:
            raise ConfigError(f"columns: maps columns to both {name!r} and {linear!r}; expected one")
        present = mapped or [name]
    if not present:
        raise InputError(path, f"missing column; expected {name!r} (or a `columns` entry naming it); "
                         f"file has {', '.join(table.colnames)}", column=name)
    check_scalar(table, names[present[0]], path)
    return present[0], names[present[0]]


class _Checked:
    """One numeric column: values in standard units, raw file values and a reason per bad row."""

    def __init__(self, column, source):
        self.source = source
        self.raw = np.asarray(np.ma.getdata(column))
        masked = np.array(np.ma.getmaskarray(column), dtype=bool)
        if self.raw.dtype.kind == "b":  # True/False are not measurements
            values, nonnumeric = np.full(len(column), np.nan), np.ones(len(column), dtype=bool)
        elif self.raw.dtype.kind in "iuf":
            values, nonnumeric = self.raw.astype(float), np.zeros(len(column), dtype=bool)
        else:
            text = np.char.strip(self.raw.astype(str))
            masked |= text == ""
            values = np.array(pd.to_numeric(pd.Series(text), errors="coerce"), dtype=float)
            nonnumeric = np.isnan(values) & ~masked & (np.char.lower(text) != "nan")
        values[masked] = np.nan
        self.values = values
        self.masked = masked
        self.reasons = np.full(len(values), None, dtype=object)
        self.flag(masked, "expected a value; the cell is empty")
        self.flag(nonnumeric, "expected a number" + (" (the column holds true/false)" if self.raw.dtype.kind == "b" else ""))

    def flag(self, mask, reason):
        """Record `reason` for rows in `mask` that have no earlier reason."""
        fresh = np.asarray(mask, dtype=bool) & np.equal(self.reasons, None)
        self.reasons[fresh] = reason

    def value_at(self, index):
        value = None if self.masked[index] else self.raw[index]
        return value.item() if isinstance(value, np.generic) else value


def _unit_kind(unit, path, source):
    """'log' (no unit or dex), 'function' (a logarithmic unit such as dex(solMass)) or 'mass'."""
    if unit is None:
        return "log"
    import astropy.units as u

    if unit == u.dimensionless_unscaled or unit == u.dex:
        return "log"
    if isinstance(unit, u.FunctionUnitBase) and unit.physical_unit.physical_type == "mass":
        return "function"
    if not isinstance(unit, u.FunctionUnitBase) and unit.physical_type == "mass":
        return "mass"
    raise InputError(path, f"expected no unit, dex, dex(solMass) or a mass unit, got {unit}", column=source)


def _mass_columns(table, names, quantity, path):
    """log10 M/Msun and its dex uncertainty for quantity 'mbh' or 'mstar', converting units."""
    checked = []
    log_mass = None
    for name in (f"log_{quantity}", f"log_{quantity}_err"):
        key, source = _resolve(table, names, name, path)
        column = table[source]
        unit = getattr(column, "unit", None)
        kind = _unit_kind(unit, path, source)
        if key in LINEAR_COLUMNS and kind != "mass":
            raise InputError(path, f"expected a mass unit (e.g. solMass) on a linear-mass column, got "
                             f"{unit}; or give log10(M/Msun) as {name!r}", column=source)
        col = _Checked(column, source)
        values = col.values
        if kind != "log":  # a unit to convert (FITS, ECSV): astropy is imported only then
            import astropy.units as u
        with np.errstate(divide="ignore", invalid="ignore"):
            if kind == "function" and name.endswith("_err"):
                col.values = values * abs((1.0 * unit.function_unit).to(u.dex).value)
            elif kind == "function":
                col.values = (values * unit).to(u.dex(u.Msun)).value
            elif kind == "mass":
                linear = (values * unit).to(u.Msun).value
                col.flag(linear <= 0, "expected a positive mass")
                positive = np.where(linear > 0, linear, np.nan)
                col.values = (positive / (10.0 ** log_mass * np.log(10.0)) if name.endswith("_err")
                              else np.log10(positive))
        if log_mass is None:
            log_mass = col.values
        checked.append((name, col))
    return checked


def _numeric_columns(table, names, path):
    """All standard numeric columns as (standard name, _Checked), with range checks applied."""
    _, source = _resolve(table, names, "z", path)
    check_redshift_unit(table[source], source, path)
    z = _Checked(table[source], source)
    columns = [("z", z), *_mass_columns(table, names, "mbh", path),
               *_mass_columns(table, names, "mstar", path)]
    for name, col in columns:
        col.flag(~np.isfinite(col.values), "expected a finite number")
        values = np.nan_to_num(col.values)
        if name == "z":
            col.flag((values < Z_RANGE[0]) | (values > Z_RANGE[1]), "expected 0 <= z <= 20")
        elif name.endswith("_err"):
            col.flag(values <= 0, "expected an uncertainty > 0 dex")
        else:
            col.flag(values > LINEAR_HINT, "expected log10(M/Msun) in [0, 13]; "
                                           "looks like a linear mass; give log10(M/Msun)")
            col.flag((values < LOG_MASS_RANGE[0]) | (values > LOG_MASS_RANGE[1]),
                     "expected log10(M/Msun) in [0, 13]")
    return columns


def _labels(table, names, name, fallback, path=None):
    """A string column (id, sample, method, host_type, source); empty cells take `fallback`. Returns (labels, empty mask)."""
    if name not in names:
        return np.full(len(table), fallback, dtype=object), np.zeros(len(table), dtype=bool)
    check_scalar(table, names[name], path)
    column = table[names[name]]
    labels = np.char.strip(np.asarray(np.ma.getdata(column)).astype(str)).astype(object)
    empty = np.array(np.ma.getmaskarray(column), dtype=bool) | (labels == "")
    labels[empty] = fallback
    return labels, empty


def _rows_without(n, bad):
    """0-based indices of rows 0..n-1 not in `bad`."""
    keep = np.ones(n, dtype=bool)
    keep[np.fromiter(bad, dtype=int, count=len(bad))] = False
    return np.flatnonzero(keep)


def _problems(ids, id_empty, id_source, columns):
    """{0-based row: problem dict} for every bad row (its first problem, columns in standard order)."""
    found = {}
    for index in np.flatnonzero(id_empty):
        found[index] = {"row": int(index) + 1, "column": id_source, "value": None,
                        "reason": "expected a non-empty id"}
    for _, col in columns:
        for index in np.flatnonzero(~np.equal(col.reasons, None)):
            found.setdefault(index, {"row": int(index) + 1, "column": col.source,
                                     "value": col.value_at(index), "reason": col.reasons[index]})
    good = _rows_without(len(ids), found)
    codes = pd.factorize(ids[good])[0]  # hash-based: fast for 10^6 ids
    first_row = good[np.unique(codes, return_index=True)[1]][codes]
    for index, seen in zip(good[first_row != good], first_row[first_row != good]):
        found[index] = {"row": int(index) + 1, "column": id_source, "value": ids[index],
                        "reason": f"expected a unique id; also in row {int(seen) + 1}"}
    return dict(sorted(found.items()))


def _load(path, *, sample=None, column_map=None, drop_invalid=False, default_method=None):
    """read_catalog, also returning the 1-based file rows of the kept objects."""
    path = Path(path)
    id_name = next((source for source, target in (column_map or {}).items() if target == "id"), "id")
    table, stem = read_table(path, id_name)
    return catalog_from_table(table, path, stem, sample=sample, column_map=column_map, drop_invalid=drop_invalid,
                       default_method=default_method)


def catalog_from_table(table, path, stem, *, sample=None, column_map=None, drop_invalid=False, default_method=None):
    """A validated Catalog from an astropy Table read from `path` (a file, or a label for a frame)."""
    if len(table) == 0:
        raise InputError(path, "expected at least one data row; the table is empty")
    names = _column_names(table, column_map, path)
    _resolve(table, names, "id", path)
    columns = _numeric_columns(table, names, path)
    ids, id_empty = _labels(table, names, "id", "", path)
    problems = _problems(ids, id_empty, names["id"], columns)
    if problems and not drop_invalid:
        first = next(iter(problems.values()))
        raise InputError(path, first["reason"], row=first["row"], column=first["column"],
                         value=first["value"])
    keep = _rows_without(len(table), problems)
    if len(keep) == 0:
        raise InputError(path, f"expected at least one valid row; all {len(table)} rows are invalid")
    values = {name: col.values[keep] for name, col in columns}
    catalog = Catalog.from_columns(
        ids=ids[keep], **values, files=(str(path),),
        sample=_labels(table, names, "sample", sample if sample is not None else stem, path)[0][keep],
        method=_labels(table, names, "method", default_method or DEFAULT_METHOD, path)[0][keep],
        host_type=_labels(table, names, "host_type", DEFAULT_HOST_TYPE, path)[0][keep],
        source=_labels(table, names, "source", DEFAULT_SOURCE, path)[0][keep])
    return catalog, list(problems.values()), keep + 1


def read_catalog(path, *, sample=None, column_map=None, drop_invalid=False, default_method=None):
    """Read and validate one catalogue file.

    Parameters
    ----------
    path : str or Path
        .csv, .tsv/.tab (tab separated; in both, lines starting with ``#`` are comments), .ecsv,
        .fits/.fit/.fits.gz or .parquet.
    sample : str, optional
        Label for rows without a ``sample`` column or cell; default the file's stem.
    column_map : dict, optional
        File column name -> one of `MAP_TARGETS` (standard names, or linear ``mbh``, ``mstar``, ...).
    drop_invalid : bool
        Drop invalid rows and report them, instead of raising on the first.
    default_method : str, optional
        Mass method for rows without a ``method`` column or cell; default "unspecified".

    Returns
    -------
    catalog : Catalog
    report : list of dict
        Per dropped row: ``row`` (1-based data row), ``column`` (file's name), ``value`` (as stored),
        ``reason``.

    Notes
    -----
    Units (astropy ECSV, FITS, Parquet). A mass column without a unit or in dex is log10 M/Msun; one
    in a logarithmic mass unit (``dex(solMass)``, ``dex(kg)``) is converted to log10 M/Msun; one in a
    linear mass unit (``solMass``, ``kg``; named ``mbh``/``mstar`` or the log name) becomes
    log10(M/Msun), and its uncertainty, if in a mass unit, err / (M ln 10) dex. If both ``log_mbh``
    and ``mbh`` exist, the one `column_map` names wins, else ``log_mbh``. Empty or masked cells are
    missing values.

    Raises
    ------
    InputError
        One line naming file, row, column and value (see the module docstring).
    ConfigError
        `column_map` names an unknown target, or maps two columns to one mass.
    """
    catalog, report, _ = _load(path, sample=sample, column_map=column_map, drop_invalid=drop_invalid,
                               default_method=default_method)
    return catalog, report


def _earlier_ids(earlier, ids):
    """{index in `ids`: (path, row)} for ids already read from earlier files [(path, ids, rows), ...]."""
    if not earlier:
        return {}
    paths = np.concatenate([np.full(len(rows), path, dtype=object) for path, _, rows in earlier])
    rows = np.concatenate([rows for _, _, rows in earlier])
    position = pd.Index(np.concatenate([ids for _, ids, _ in earlier])).get_indexer(ids)
    return {int(k): (paths[position[k]], int(rows[position[k]])) for k in np.flatnonzero(position >= 0)}


def read_catalogs(entries):
    """Read several files into one Catalog; ids must be unique across all of them.

    Parameters
    ----------
    entries : iterable of path or (path, options); a `data.frames.FrameSource` may stand for a path
        `options` is a dict of `read_catalog` keyword arguments (sample, column_map, drop_invalid,
        default_method) or None.

    Returns
    -------
    catalog : Catalog
    inputs : list of dict
        Per file: ``path``, ``sha256``, ``rows`` (objects kept), ``samples`` (sample names), ``dropped``
        (the report of dropped rows, including ids already used by an earlier file).
    """
    from cosmogrow.outputs import sha256_file

    catalogs, inputs, earlier = [], [], []
    for entry in entries:
        path, options = (entry, None) if isinstance(entry, (str, Path)) else entry
        options = dict(options or {})
        unknown = sorted(set(options) - set(READ_OPTIONS))
        if unknown:
            raise ConfigError(f"{path}: unknown catalogue option(s) {', '.join(unknown)}; "
                              f"expected one of {', '.join(READ_OPTIONS)}")
        in_memory = hasattr(path, "load")  # a data.frames.FrameSource
        catalog, report, rows = path.load(**options) if in_memory else _load(path, **options)
        clashes = _earlier_ids(earlier, catalog.ids)
        for index, (other_path, other_row) in clashes.items():
            reason = f"expected a unique id; also in {other_path} row {other_row}"
            if not options.get("drop_invalid"):
                raise InputError(path, reason, row=int(rows[index]), column="id", value=catalog.ids[index])
            report.append({"row": int(rows[index]), "column": "id", "value": catalog.ids[index],
                           "reason": reason})
        keep = _rows_without(len(catalog), clashes)
        catalog = catalog.subset(keep)
        earlier.append((str(path), catalog.ids, rows[keep]))
        catalogs.append(catalog)
        digest = path.sha256() if in_memory else sha256_file(path)
        inputs.append({"path": str(path), "sha256": digest, "rows": len(catalog),
                       "samples": list(catalog.sample_names),
                       "dropped": sorted(report, key=lambda d: d["row"])})
    if not catalogs:
        raise ConfigError("read_catalogs: expected at least one catalogue file")
    return Catalog.concat(catalogs), inputs


def write_catalog(catalog, path):
    """Write `catalog` with the standard columns, in the format given by the extension.

    Parameters
    ----------
    catalog : Catalog
    path : str or Path
        Any extension `read_catalog` accepts (.csv and .ecsv are the usual ones); an ECSV file also
        states the units, dex(solMass) for masses and dex for uncertainties.
    """
    from astropy.table import Table

    path = Path(path)
    try:
        _, fmt = format_of(path)
    except InputError as exc:
        raise ConfigError(str(exc)) from None
    labels = catalog.label_columns
    table = Table({name: np.asarray(getattr(catalog, "ids" if name == "id" else name)) for name in labels})
    for name in ("id", "sample", "method") + labels[len(STANDARD_COLUMNS):]:
        table[name] = table[name].astype(str)
    if fmt == "ascii.ecsv":
        for name in ("log_mbh", "log_mstar"):
            table[name].unit = "dex(solMass)"
        for name in ("log_mbh_err", "log_mstar_err"):
            table[name].unit = "dex"
    table.write(path, format=fmt, overwrite=True)
