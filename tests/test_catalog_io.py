"""Tests of cosmogrow.catalog_io: formats, column maps, units, validation messages, dropped rows."""

import hashlib
import math
import re
from pathlib import Path

import astropy.units as u
import numpy as np
import pytest
from astropy.table import MaskedColumn, QTable, Table

from cosmogrow.data.catalog import Catalog
from cosmogrow.data.readers import read_catalog, read_catalogs, write_catalog
from cosmogrow.errors import ConfigError, InputError

DATA = Path(__file__).parent / "data"
HEADER = "id,z,log_mbh,log_mbh_err,log_mstar,log_mstar_err"
GOOD_ROWS = ["a,0.1,8.0,0.1,11.0,0.1", "b,0.5,8.5,0.2,11.2,0.15", "c,1.2,9.0,0.3,11.5,0.2"]


def write_csv(tmp_path, rows, header=HEADER, name="cat.csv"):
    path = tmp_path / name
    path.write_text("\n".join([header, *rows]) + "\n")
    return path


def pinned(path, reason, row=None, column=None, value=None):
    """The exact one-line InputError message, as a regex."""
    text = str(InputError(path, reason, row=row, column=column, value=value))
    assert "\n" not in text
    return "^" + re.escape(text) + "$"


def make_catalog(n=5):
    rng = np.random.default_rng(1)
    return Catalog.from_columns(ids=[f"obj{i}" for i in range(n)], z=rng.uniform(0, 2, n),
                                log_mbh=rng.uniform(6, 10, n), log_mbh_err=rng.uniform(0.05, 0.4, n),
                                log_mstar=rng.uniform(9, 12, n), log_mstar_err=rng.uniform(0.05, 0.3, n),
                                sample=["s1", "s2", "s1", "s2", "s1"][:n],
                                method=["dynamical", "virial", "virial", "reverberation", "dynamical"][:n])


def assert_same(a, b):
    for name in ("ids", "sample", "method"):
        assert getattr(a, name).tolist() == getattr(b, name).tolist()
    for name in ("z", "log_mbh", "log_mbh_err", "log_mstar", "log_mstar_err"):
        np.testing.assert_array_equal(getattr(a, name), getattr(b, name))


# --- reading and defaults --------------------------------------------------------------------------

def test_csv_values_and_defaults(tmp_path):
    path = write_csv(tmp_path, ["# a comment line is not a data row", *GOOD_ROWS], name="local.csv")
    catalog, report = read_catalog(path)
    assert report == []
    assert catalog.ids.tolist() == ["a", "b", "c"]
    np.testing.assert_array_equal(catalog.z, [0.1, 0.5, 1.2])
    np.testing.assert_array_equal(catalog.log_mstar_err, [0.1, 0.15, 0.2])
    assert catalog.sample_names == ("local",)  # file stem
    assert catalog.method_names == ("unspecified",)
    assert catalog.files == (str(path),)


def test_sample_and_method_arguments_and_columns(tmp_path):
    path = write_csv(tmp_path, GOOD_ROWS)
    catalog, _ = read_catalog(path, sample="deep", default_method="virial")
    assert catalog.sample_names == ("deep",) and catalog.method_names == ("virial",)
    rows = [r + s for r, s in zip(GOOD_ROWS, [",A,dynamical", ",B,", ",A,virial"])]
    catalog, _ = read_catalog(write_csv(tmp_path, rows, HEADER + ",sample,method"), sample="x",
                              default_method="maser")
    assert catalog.sample.tolist() == ["A", "B", "A"]
    assert catalog.method.tolist() == ["dynamical", "maser", "virial"]  # empty cell -> default


def test_ids_are_text(tmp_path):
    rows = ["007" + GOOD_ROWS[0][1:], "7" + GOOD_ROWS[1][1:], "1e3" + GOOD_ROWS[2][1:]]
    assert read_catalog(write_csv(tmp_path, rows))[0].ids.tolist() == ["007", "7", "1e3"]
    header = HEADER.replace("id,", "name,")
    catalog, _ = read_catalog(write_csv(tmp_path, rows, header), column_map={"name": "id"})
    assert catalog.ids.tolist() == ["007", "7", "1e3"]
    table = Table({"id": np.array([7, 8], dtype=np.int16), "z": [0.1, 0.2], "log_mbh": [8.0, 8.0],
                   "log_mbh_err": [0.1, 0.1], "log_mstar": [11.0, 11.0], "log_mstar_err": [0.1, 0.1]})
    table.write(tmp_path / "int_ids.fits")
    assert read_catalog(tmp_path / "int_ids.fits")[0].ids.tolist() == ["7", "8"]


# --- formats ----------------------------------------------------------------------------------------

@pytest.mark.parametrize("suffix", [".csv", ".tsv", ".tab", ".ecsv", ".fits", ".fit", ".fits.gz", ".parquet"])
def test_round_trip(tmp_path, suffix):
    catalog = make_catalog()
    path = tmp_path / f"sim{suffix}"
    write_catalog(catalog, path)
    back, report = read_catalog(path)
    assert report == []
    assert_same(back, catalog)


def test_tsv_written_by_hand(tmp_path):
    path = tmp_path / "cat.tsv"
    path.write_text("\n".join(line.replace(",", "\t") for line in [HEADER, *GOOD_ROWS]) + "\n")
    catalog, _ = read_catalog(path)
    np.testing.assert_array_equal(catalog.log_mbh, [8.0, 8.5, 9.0])


def test_parquet_written_by_pandas(tmp_path):
    frame = make_catalog().to_dataframe()
    path = tmp_path / "cat.parquet"
    frame.to_parquet(path)
    assert_same(read_catalog(path)[0], make_catalog())


def test_unknown_extension(tmp_path):
    path = tmp_path / "cat.xlsx"
    path.write_text("x")
    with pytest.raises(InputError, match=pinned(path, "expected a file ending in one of .csv, .tsv, .tab, "
                                                      ".ecsv, .fits, .fit, .fits.gz, .parquet")):
        read_catalog(path)


def test_missing_file(tmp_path):
    path = tmp_path / "absent.csv"
    with pytest.raises(InputError, match=pinned(path, "expected an existing file; no such file")):
        read_catalog(path)


def test_unreadable_file(tmp_path):
    path = tmp_path / "broken.fits"
    path.write_bytes(b"this is not a FITS file")
    with pytest.raises(InputError, match=r"broken\.fits: expected a readable fits table; "):
        read_catalog(path)


def test_malformed_csv(tmp_path):
    path = write_csv(tmp_path, [GOOD_ROWS[0], GOOD_ROWS[1] + ",extra"])
    with pytest.raises(InputError, match=r"cat\.csv: expected a readable ascii\.csv table; \S") as info:
        read_catalog(path)
    assert "\n" not in str(info.value)


def test_empty_table(tmp_path):
    path = write_csv(tmp_path, [])
    with pytest.raises(InputError, match=pinned(path, "expected at least one data row; the table is empty")):
        read_catalog(path)


def test_write_unknown_extension(tmp_path):
    with pytest.raises(ConfigError, match=r"cat\.txt: expected a file ending in one of \.csv"):
        write_catalog(make_catalog(), tmp_path / "cat.txt")


# --- validation: one line naming file, row, column, value ---------------------------------------------

def test_missing_column(tmp_path):
    path = write_csv(tmp_path, [r.rsplit(",", 1)[0] for r in GOOD_ROWS], header=HEADER.rsplit(",", 1)[0])
    reason = ("missing column; expected 'log_mstar_err' (or a `columns` entry naming it); "
              "file has id, z, log_mbh, log_mbh_err, log_mstar")
    with pytest.raises(InputError, match=pinned(path, reason, column="log_mstar_err")):
        read_catalog(path)


def test_missing_id_column(tmp_path):
    path = write_csv(tmp_path, [r.split(",", 1)[1] for r in GOOD_ROWS], header=HEADER.split(",", 1)[1])
    with pytest.raises(InputError, match=r"cat\.csv, column 'id': missing column; expected 'id'"):
        read_catalog(path)


BAD_CELLS = [
    # (column index, bad cell, column name, value shown, reason)
    (1, "abc", "z", "abc", "expected a number"),
    (2, "8.1x", "log_mbh", "8.1x", "expected a number"),
    (1, "nan", "z", math.nan, "expected a finite number"),
    (2, "inf", "log_mbh", math.inf, "expected a finite number"),
    (3, "-inf", "log_mbh_err", -math.inf, "expected a finite number"),
    (4, "", "log_mstar", None, "expected a value; the cell is empty"),
    (1, "", "z", None, "expected a value; the cell is empty"),
    (1, "-0.01", "z", -0.01, "expected 0 <= z <= 20"),
    (1, "20.5", "z", 20.5, "expected 0 <= z <= 20"),
    (3, "0", "log_mbh_err", 0.0, "expected an uncertainty > 0 dex"),
    (5, "-0.1", "log_mstar_err", -0.1, "expected an uncertainty > 0 dex"),
    (2, "-0.5", "log_mbh", -0.5, "expected log10(M/Msun) in [0, 13]"),
    (4, "13.2", "log_mstar", 13.2, "expected log10(M/Msun) in [0, 13]"),
    (2, "300000000.0", "log_mbh", 3e8,
     "expected log10(M/Msun) in [0, 13]; looks like a linear mass; give log10(M/Msun)"),
    (4, "1e11", "log_mstar", 1e11,
     "expected log10(M/Msun) in [0, 13]; looks like a linear mass; give log10(M/Msun)"),
]


def replace_cell(row, index, cell):
    cells = row.split(",")
    cells[index] = cell
    return ",".join(cells)


@pytest.mark.parametrize("index,cell,column,value,reason", BAD_CELLS)
def test_bad_cell_message(tmp_path, index, cell, column, value, reason):
    rows = list(GOOD_ROWS)
    rows[1] = replace_cell(rows[1], index, cell)
    path = write_csv(tmp_path, ["# comments do not count as rows", *rows])
    with pytest.raises(InputError) as info:
        read_catalog(path)
    error = info.value
    assert (error.row, error.column) == (2, column)
    if isinstance(value, float) and math.isnan(value):
        assert math.isnan(error.value)
    else:
        assert error.value == value
    with pytest.raises(InputError, match=pinned(path, reason, row=2, column=column, value=value)):
        read_catalog(path)


def test_first_problem_is_raised(tmp_path):
    rows = [replace_cell(GOOD_ROWS[0], 4, "20"), GOOD_ROWS[1], replace_cell(GOOD_ROWS[2], 1, "-1")]
    path = write_csv(tmp_path, rows)
    with pytest.raises(InputError, match=pinned(path, "expected log10(M/Msun) in [0, 13]", row=1,
                                                column="log_mstar", value=20.0)):
        read_catalog(path)


def test_duplicate_ids(tmp_path):
    path = write_csv(tmp_path, [*GOOD_ROWS, "b,0.7,8.2,0.2,11.0,0.1"])
    with pytest.raises(InputError, match=pinned(path, "expected a unique id; also in row 2", row=4,
                                                column="id", value="b")):
        read_catalog(path)


def test_empty_id(tmp_path):
    path = write_csv(tmp_path, [GOOD_ROWS[0], replace_cell(GOOD_ROWS[1], 0, "")])
    with pytest.raises(InputError, match=pinned(path, "expected a non-empty id", row=2, column="id")):
        read_catalog(path)


def test_nan_in_fits_is_named_as_nan(tmp_path):
    # FITS stores a masked float as NaN: the file holds a NaN, and the message says so
    table = Table.read(write_csv(tmp_path, GOOD_ROWS), format="ascii.csv")
    table["log_mbh_err"] = MaskedColumn(table["log_mbh_err"], mask=[False, False, True])
    path = tmp_path / "masked.fits"
    table.write(path)
    with pytest.raises(InputError, match=pinned(path, "expected a finite number", row=3,
                                                column="log_mbh_err", value=float("nan"))):
        read_catalog(path)


# --- dropping invalid rows ----------------------------------------------------------------------------

def test_drop_invalid_lists_every_dropped_row(tmp_path):
    rows = [GOOD_ROWS[0], replace_cell(GOOD_ROWS[1], 1, "abc"), GOOD_ROWS[2],
            "d,25,8.0,0.1,11.0,0.1", "a,0.3,8.0,0.1,11.0,0.1", "e,0.3,8.0,0.1,5e10,0.1",
            "f,0.2,8.0,-0.1,11.0,nan"]
    catalog, report = read_catalog(write_csv(tmp_path, rows), drop_invalid=True)
    assert catalog.ids.tolist() == ["a", "c"]
    assert report == [
        {"row": 2, "column": "z", "value": "abc", "reason": "expected a number"},
        {"row": 4, "column": "z", "value": "25", "reason": "expected 0 <= z <= 20"},
        {"row": 5, "column": "id", "value": "a", "reason": "expected a unique id; also in row 1"},
        {"row": 6, "column": "log_mstar", "value": 5e10,
         "reason": "expected log10(M/Msun) in [0, 13]; looks like a linear mass; give log10(M/Msun)"},
        {"row": 7, "column": "log_mbh_err", "value": -0.1, "reason": "expected an uncertainty > 0 dex"},
    ]


def test_drop_invalid_keeps_later_duplicate_when_first_is_invalid(tmp_path):
    rows = ["a,-1,8.0,0.1,11.0,0.1", "a,0.2,8.0,0.1,11.0,0.1"]
    catalog, report = read_catalog(write_csv(tmp_path, rows), drop_invalid=True)
    assert catalog.z.tolist() == [0.2] and [d["row"] for d in report] == [1]


def test_drop_invalid_with_no_valid_row(tmp_path):
    path = write_csv(tmp_path, ["a,-1,8.0,0.1,11.0,0.1"])
    with pytest.raises(InputError, match=pinned(path, "expected at least one valid row; all 1 rows are invalid")):
        read_catalog(path, drop_invalid=True)


# --- column map ---------------------------------------------------------------------------------------

def test_column_map(tmp_path):
    header = "name,redshift,logM,logM_err,log_mstar,log_mstar_err,survey,technique"
    rows = [r + ",S,virial" for r in GOOD_ROWS]
    column_map = {"name": "id", "redshift": "z", "logM": "log_mbh", "logM_err": "log_mbh_err",
                  "survey": "sample", "technique": "method"}
    catalog, _ = read_catalog(write_csv(tmp_path, rows, header), column_map=column_map)
    assert catalog.ids.tolist() == ["a", "b", "c"]
    np.testing.assert_array_equal(catalog.log_mbh, [8.0, 8.5, 9.0])
    assert catalog.sample_names == ("S",) and catalog.method_names == ("virial",)


def test_column_map_errors_name_the_mapped_column(tmp_path):
    path = write_csv(tmp_path, [replace_cell(GOOD_ROWS[0], 1, "x")], HEADER.replace(",z,", ",redshift,"))
    with pytest.raises(InputError, match=pinned(path, "expected a number", row=1, column="redshift", value="x")):
        read_catalog(path, column_map={"redshift": "z"})
    reason = ("missing column; columns maps 'zz' to 'z'; "
              "file has id, redshift, log_mbh, log_mbh_err, log_mstar, log_mstar_err")
    with pytest.raises(InputError, match=pinned(path, reason, column="zz")):
        read_catalog(path, column_map={"zz": "z"})


def test_column_map_unknown_target(tmp_path):
    path = write_csv(tmp_path, GOOD_ROWS)
    with pytest.raises(ConfigError, match=r"^columns: unknown target column\(s\) 'redshift'; expected one of "
                                          r"id, z, log_mbh, log_mbh_err, log_mstar, log_mstar_err, sample, "
                                          r"method, host_type, source, mbh, mbh_err, mstar, mstar_err$"):
        read_catalog(path, column_map={"z": "redshift"})


def test_column_map_two_sources_one_target(tmp_path):
    path = write_csv(tmp_path, GOOD_ROWS)
    with pytest.raises(ConfigError, match=r"several columns map to 'z'; expected at most one"):
        read_catalog(path, column_map={"z": "z", "log_mbh": "z"})


# --- units --------------------------------------------------------------------------------------------

def unit_table(**columns):
    base = {"id": ["a", "b"], "z": [0.1, 0.2]}
    return QTable({**base, **columns})


@pytest.mark.parametrize("suffix", [".ecsv", ".fits", ".parquet"])
def test_linear_masses_in_solar_masses(tmp_path, suffix):
    mbh = np.array([1e8, 3e9])
    mbh_err = np.array([2e7, 3e8])
    table = unit_table(mbh=mbh * u.Msun, mbh_err=mbh_err * u.Msun,
                       mstar=np.array([1e11, 2e11]) * u.Msun, log_mstar_err=[0.1, 0.2])
    path = tmp_path / f"units{suffix}"
    table.write(path)
    catalog, _ = read_catalog(path)
    np.testing.assert_allclose(catalog.log_mbh, np.log10(mbh), rtol=0, atol=1e-12)
    # d log10 M = dM / (M ln 10)
    np.testing.assert_allclose(catalog.log_mbh_err, mbh_err / (mbh * np.log(10)), rtol=1e-12)
    np.testing.assert_allclose(catalog.log_mstar, [11.0, np.log10(2e11)], atol=1e-12)


def test_mapped_linear_mass_in_kg_and_dex_units(tmp_path):
    msun_kg = (1 * u.Msun).to(u.kg).value
    table = unit_table(M_BH=np.array([1e8, 1e9]) * msun_kg * u.kg, e_M=[0.1, 0.2] * u.dex,
                       log_mstar=[11.0, 11.5] * u.dex(u.Msun), log_mstar_err=[0.1, 0.1] * u.dex(u.Msun))
    path = tmp_path / "kg.ecsv"
    table.write(path)
    catalog, _ = read_catalog(path, column_map={"M_BH": "mbh", "e_M": "log_mbh_err"})
    np.testing.assert_allclose(catalog.log_mbh, [8.0, 9.0], atol=1e-12)
    np.testing.assert_allclose(catalog.log_mbh_err, [0.1, 0.2])
    np.testing.assert_allclose(catalog.log_mstar, [11.0, 11.5])
    np.testing.assert_allclose(catalog.log_mstar_err, [0.1, 0.1])


def test_log_column_in_dex_kg_and_linear_unit(tmp_path):
    log_kg = np.log10((np.array([1e8, 1e9]) * u.Msun).to(u.kg).value)
    table = unit_table(log_mbh=log_kg * u.dex(u.kg), log_mbh_err=[0.1, 0.1],
                       log_mstar=[1e11, 1e12] * u.Msun, log_mstar_err=[1e10, 1e11] * u.Msun)
    path = tmp_path / "dexkg.ecsv"
    table.write(path)
    catalog, _ = read_catalog(path)
    np.testing.assert_allclose(catalog.log_mbh, [8.0, 9.0], atol=1e-12)
    np.testing.assert_allclose(catalog.log_mstar, [11.0, 12.0], atol=1e-12)
    np.testing.assert_allclose(catalog.log_mstar_err, 0.1 / np.log(10), rtol=1e-12)


def test_unit_errors(tmp_path):
    path = tmp_path / "speed.ecsv"
    unit_table(log_mbh=[8.0, 9.0] * u.km / u.s, log_mbh_err=[0.1, 0.1], log_mstar=[11, 11],
               log_mstar_err=[0.1, 0.1]).write(path)
    with pytest.raises(InputError, match=pinned(path, "expected no unit, dex, dex(solMass) or a mass unit, "
                                                      "got km / s", column="log_mbh")):
        read_catalog(path)
    path = tmp_path / "nounit.ecsv"
    unit_table(mbh=[1e8, 1e9], log_mbh_err=[0.1, 0.1], log_mstar=[11, 11], log_mstar_err=[0.1, 0.1]).write(path)
    reason = "expected a mass unit (e.g. solMass) on a linear-mass column, got None; or give log10(M/Msun) as 'log_mbh'"
    with pytest.raises(InputError, match=pinned(path, reason, column="mbh")):
        read_catalog(path)


def test_log_and_linear_both_present(tmp_path):
    path = tmp_path / "both.ecsv"
    unit_table(log_mbh=[8.0, 9.0], mbh=[1e7, 1e6] * u.Msun, M=[1e5, 1e4] * u.Msun, logM=[3.0, 2.0],
               log_mbh_err=[0.1, 0.1], log_mstar=[11, 11], log_mstar_err=[0.1, 0.1]).write(path)
    np.testing.assert_allclose(read_catalog(path)[0].log_mbh, [8.0, 9.0])  # the log column wins
    np.testing.assert_allclose(read_catalog(path, column_map={"M": "mbh"})[0].log_mbh, [5.0, 4.0])
    np.testing.assert_allclose(read_catalog(path, column_map={"mbh": "mbh"})[0].log_mbh, [8.0, 9.0])
    with pytest.raises(ConfigError, match=r"^columns: maps columns to both 'log_mbh' and 'mbh'; expected one$"):
        read_catalog(path, column_map={"M": "mbh", "logM": "log_mbh"})


def test_non_positive_linear_mass(tmp_path):
    path = tmp_path / "zero.ecsv"
    unit_table(mstar=[1e11, 0.0] * u.Msun, log_mbh=[8.0, 9.0], log_mbh_err=[0.1, 0.1],
               log_mstar_err=[0.1, 0.1]).write(path)
    with pytest.raises(InputError, match=pinned(path, "expected a positive mass", row=2, column="mstar", value=0.0)):
        read_catalog(path)


# --- several files ------------------------------------------------------------------------------------

def test_read_catalogs_concatenates_and_describes_inputs(tmp_path):
    first = write_csv(tmp_path, GOOD_ROWS, name="local.csv")
    second = write_csv(tmp_path, ["x,2.0,8.0,0.1,11.0,0.1", "y,2.5,8.0,0.1,-3,0.1"], name="deep.csv")
    catalog, inputs = read_catalogs([first, (second, {"drop_invalid": True, "default_method": "virial"})])
    assert catalog.ids.tolist() == ["a", "b", "c", "x"]
    assert catalog.sample_names == ("local", "deep") and catalog.method_names == ("unspecified", "virial")
    assert catalog.files == (str(first), str(second))
    assert inputs[0] == {"path": str(first), "sha256": hashlib.sha256(first.read_bytes()).hexdigest(),
                         "rows": 3, "samples": ["local"], "dropped": []}
    assert inputs[1]["rows"] == 1 and inputs[1]["samples"] == ["deep"]
    assert inputs[1]["dropped"] == [{"row": 2, "column": "log_mstar", "value": -3,
                                     "reason": "expected log10(M/Msun) in [0, 13]"}]


def test_read_catalogs_duplicate_across_files(tmp_path):
    first = write_csv(tmp_path, GOOD_ROWS, name="one.csv")
    second = write_csv(tmp_path, ["x,2.0,8.0,0.1,11.0,0.1", "c,2.5,8.0,0.1,11.0,0.1"], name="two.csv")
    reason = f"expected a unique id; also in {first} row 3"
    with pytest.raises(InputError, match=pinned(second, reason, row=2, column="id", value="c")):
        read_catalogs([first, second])
    third = write_csv(tmp_path, ["a,3.0,8.0,0.1,11.0,0.1", "z,2.5,8.0,0.1,11.0,0.1", "x,2.5,8.0,0.1,11.0,0.1"],
                      name="three.csv")
    catalog, inputs = read_catalogs([first, (second, {"drop_invalid": True}), (third, {"drop_invalid": True})])
    assert catalog.ids.tolist() == ["a", "b", "c", "x", "z"]
    assert inputs[1]["dropped"] == [{"row": 2, "column": "id", "value": "c", "reason": reason}]
    assert [(d["row"], d["reason"]) for d in inputs[2]["dropped"]] == [
        (1, f"expected a unique id; also in {first} row 1"), (3, f"expected a unique id; also in {second} row 1")]


def test_read_catalogs_bad_options(tmp_path):
    path = write_csv(tmp_path, GOOD_ROWS)
    with pytest.raises(ConfigError, match=r"cat\.csv: unknown catalogue option\(s\) drop; expected one of "
                                          r"sample, column_map, drop_invalid, default_method$"):
        read_catalogs([(path, {"drop": True})])
    with pytest.raises(ConfigError, match=r"^read_catalogs: expected at least one catalogue file$"):
        read_catalogs([])


# --- real data: a subset of van den Bosch (2016) -------------------------------------------------------

def test_van_den_bosch_subset():
    # tests/data/vdb2016_subset.csv: 20 rows of BHcompilation.fits (van den Bosch 2016, ApJ 831, 134,
    # arXiv:1606.01246; MIT licence); its header states the selection and the derived columns.
    column_map = {"NAME": "id", "Z_HUBBLE": "z", "MBH": "log_mbh", "DMBH": "log_mbh_err",
                  "LOGMSTAR": "log_mstar", "DLK": "log_mstar_err", "TYPE": "method"}
    catalog, report = read_catalog(DATA / "vdb2016_subset.csv", column_map=column_map)
    assert report == [] and len(catalog) == 20
    assert catalog.sample_names == ("vdb2016_subset",)
    assert set(catalog.method_names) == {"gas", "maser", "star", "CO"}
    # Values as written in the CSV, copied from the FITS row of NGC1332 (MBH, DMBH, DDIST, LK):
    index = catalog.ids.tolist().index("NGC1332")
    assert catalog.log_mbh[index] == 8.8285 and catalog.log_mbh_err[index] == 0.0419
    # z = H0 d / c with H0 = 70 km/s/Mpc, d = 22.3 Mpc (common practice: Hubble law at low z)
    assert catalog.z[index] == pytest.approx(70 * 22.3 / 299792.458, rel=1e-5)
    # log M* = LK + log10(0.8), LK = 11.314762 (mass-to-light ratio 0.8 Msun/Lsun in K, common practice)
    assert catalog.log_mstar[index] == pytest.approx(11.314762 + math.log10(0.8), abs=1e-4)
    assert catalog.ids[0] == "A1836BCG" and catalog.log_mbh[0] == 9.573


def test_host_type_and_source_columns_are_read_and_written_back(tmp_path):
    path = tmp_path / "mixed.csv"
    path.write_text("id,z,log_mbh,log_mbh_err,log_mstar,log_mstar_err,host_type,source\n"
                    "a,0.01,8.5,0.1,11.0,0.1,quiescent,survey_one\n"
                    "b,0.02,7.5,0.1,10.8,0.1,agn,\n")
    catalog, _ = read_catalog(path)
    assert list(catalog.host_type) == ["quiescent", "agn"]
    assert list(catalog.source) == ["survey_one", "unspecified"]
    assert catalog.host_type_names == ("quiescent", "agn")
    write_catalog(catalog, tmp_path / "again.csv")
    again, _ = read_catalog(tmp_path / "again.csv")
    assert list(again.host_type) == ["quiescent", "agn"] and list(again.source) == list(catalog.source)


def test_optional_labels_not_written_when_absent(tmp_path):
    path = tmp_path / "plain.csv"
    path.write_text("id,z,log_mbh,log_mbh_err,log_mstar,log_mstar_err\na,0.01,8.5,0.1,11.0,0.1\n")
    catalog, _ = read_catalog(path)
    assert list(catalog.host_type) == ["unspecified"] and list(catalog.source) == ["unspecified"]
    write_catalog(catalog, tmp_path / "out.csv")
    header = (tmp_path / "out.csv").read_text().splitlines()[0]
    assert "host_type" not in header and "source" not in header
