"""Malformed inputs to every command: exit code 2, one stderr line naming the file (and key, row,
column, value), nothing written. Plus inputs that must be read correctly (a BOM, a categorical
Parquet column) and the rules of --out."""

import numpy as np
import pandas as pd
import pytest
from astropy.table import Table

from cosmogrow.cli.dispatch import main

from mocks import mock_catalog, write_samples

GOOD = """
[[sample]]
name = "local"
path = "local.csv"
[[sample]]
name = "far"
path = "far.csv"
"""


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    """Two small catalogues and the files the corpus cases need."""
    folder = tmp_path_factory.mktemp("inputs")
    cat = mock_catalog(np.random.default_rng(3), 1.0, samples=((0.02, 40, "dynamical"), (1.2, 40, "virial")))
    write_samples(cat, folder, ("local.csv", "far.csv"))
    frame = pd.read_csv(folder / "local.csv")
    base = Table.from_pandas(frame)
    table = base.copy()
    table["z"].unit = "km"
    table.write(folder / "z_km.ecsv")
    table = base.copy()
    table["log_mbh_err"] = np.ones(len(table), dtype=bool)
    table.write(folder / "bool_err.ecsv")
    table = base.copy()
    table["z"] = np.column_stack([table["z"], table["z"]])
    table.write(folder / "vector.fits")
    table = base.copy()
    table["log_mstar"][4] = np.nan
    table.write(folder / "nan.fits")
    listed = frame.copy()
    listed["z"] = [[value] for value in frame["z"]]
    listed.to_parquet(folder / "list.parquet")
    text = (folder / "local.csv").read_text().splitlines()
    (folder / "two_z.csv").write_text("\n".join([text[0] + ",z"] + [row + ",0.5" for row in text[1:]]) + "\n")
    (folder / "a_folder.csv").mkdir()
    (folder / "remnants.csv").write_text("id,mass,mass_err,z_obs,z_form\nX-1,8.0,0.8,0.0,1e300\n")
    (folder / "not_a_folder").write_text("a file\n")
    return folder


def toml(folder, name, text):
    path = folder / name
    path.write_text(text)
    return path


def run_cli(argv, capsys):
    """Exit code and stderr lines of one command (argparse's own exit included)."""
    try:
        code = main([str(a) for a in argv])
    except SystemExit as exc:
        code = exc.code
    return code, capsys.readouterr().err.strip().splitlines()


# (case id, file name or None, TOML text or file bytes, argv after the file, words the line must hold)
CONFIG_CASES = [
    ("path-number", "[[sample]]\npath = 5\n", ["sample[1].path", "5"]),
    ("H0-string", 'seed = 1\n[cosmology]\nH0 = "seventy"\nOm0 = 0.3\n' + GOOD, ["cosmology.H0", "seventy"]),
    ("m_nu-string", '[cosmology]\nH0 = 70\nOm0 = 0.3\nOde0 = 0.7\nm_nu = "abc"\n' + GOOD, ["cosmology.m_nu"]),
    ("H0-zero", "[cosmology]\nH0 = 0\nOm0 = 0.3\n" + GOOD, ["cosmology.H0", "> 0"]),
    ("H0-negative", "[cosmology]\nH0 = -70\nOm0 = 0.3\n" + GOOD, ["cosmology.H0"]),
    ("Om0-above-1-flat", "[cosmology]\nH0 = 70\nOm0 = 1.5\n" + GOOD, ["cosmology.Om0", "1.5"]),
    ("no-big-bang", "[cosmology]\nH0 = 70\nOm0 = 0.1\nOde0 = 2.0\n" + GOOD, ["cosmology", "H(z)^2"]),
    ("sample-number", "sample = 5\n", ["sample", "5"]),
    ("columns-string", '[[sample]]\npath = "local.csv"\ncolumns = "logM"\n', ["sample[1].columns", "logM"]),
    ("columns-unknown-target", '[[sample]]\npath = "local.csv"\ncolumns = { z = "redshift" }\n',
     ["sample[1].columns", "redshift"]),
    ("check_every-0", "[sampler]\ncheck_every = 0\n" + GOOD, ["sampler.check_every", "0"]),
    ("check_every-negative", "[sampler]\ncheck_every = -5\n" + GOOD, ["sampler.check_every", "-5"]),
    ("check_every-string", '[sampler]\ncheck_every = "10"\n' + GOOD, ["sampler.check_every", "'10'"]),
    ("autocorr-0", "[sampler]\nautocorr_factor = 0\n" + GOOD, ["sampler.autocorr_factor"]),
    ("autocorr-negative", "[sampler]\nautocorr_factor = -50\n" + GOOD, ["sampler.autocorr_factor"]),
    ("z_ref-nan", "[model]\nz_ref = nan\n" + GOOD, ["model.z_ref", "nan"]),
    ("pivot-inf", "[model]\nlog_mstar_pivot = inf\n" + GOOD, ["model.log_mstar_pivot", "inf"]),
    ("host_growth-nan", "[model]\nhost_growth = nan\n" + GOOD, ["model.host_growth"]),
    ("offset-width-inf", "[model]\nmethod_offset_width = inf\n" + GOOD, ["model.method_offset_width"]),
    ("offset-width-unknown-method", "[model]\nmethod_offset_width = { virial = 0.3, spectroscopic = 0.2 }\n"
     + GOOD, ["model.method_offset_width.spectroscopic"]),
    ("zero-point-unknown", '[model]\nzero_point_method = "maser"\n' + GOOD, ["model.zero_point_method", "maser"]),
    ("outliers-no", "[model]\noutliers = 'no'\n" + GOOD, ["model.outliers", "'no'"]),
    ("drop_invalid-no", '[[sample]]\npath = "local.csv"\ndrop_invalid = "no"\n', ["sample[1].drop_invalid"]),
    ("seed-true", "seed = true\n" + GOOD, ["seed", "True"]),
    ("seed-negative", "seed = -3\n" + GOOD, ["seed", "-3"]),
    ("prior-negative-scatter", "[priors]\nsigma_int = [-1.0, 3.0]\n" + GOOD, ["priors.sigma_int"]),
    ("prior-nan", "[priors]\nk = [nan, 3.0]\n" + GOOD, ["priors.k"]),
    ("two-samples-one-name", '[[sample]]\nname = "a"\npath = "local.csv"\n[[sample]]\nname = "a"\n'
     'path = "far.csv"\n', ["sample", "'a'"]),
    ("selection-kind-list", '[[sample]]\npath = "local.csv"\nselection = { kind = [1] }\n', ["sample[1]", "kind"]),
    ("selection-unknown-key", '[[sample]]\npath = "local.csv"\nselection = { kind = "mass_cut", '
     'log_mbh_min = 8, depth = 2 }\n', ["sample[1]", "depth"]),
    ("H0-zero-with-selection", '[cosmology]\nH0 = 0\nOm0 = 0.3\n[[sample]]\npath = "far.csv"\n'
     'selection = { kind = "flux_limit", flux_limit = 1e-13 }\n', ["cosmology.H0"]),
    ("walkers-bool", "[sampler]\nwalkers = true\n" + GOOD, ["sampler.walkers"]),
    ("unknown-key", "[model]\nfrom = 'ratio'\n" + GOOD, ["model.from"]),
    ("catalogue-missing", '[[sample]]\npath = "nowhere.csv"\n', ["nowhere.csv"]),
]


@pytest.mark.parametrize("text, words", [case[1:] for case in CONFIG_CASES],
                         ids=[case[0] for case in CONFIG_CASES])
def test_bad_run_configuration_is_one_line_naming_the_file(folder, tmp_path, capsys, text, words):
    config = toml(folder, "case.toml", text)
    out = tmp_path / "out"
    code, err = run_cli(["fit", "--config", config, "--out", out, "--quiet", "--seed", "1"], capsys)
    assert code == 2
    assert len(err) == 1, err
    assert str(config) in err[0] or "nowhere.csv" in err[0]
    for word in words:
        assert word in err[0], (word, err[0])
    assert "<defaults>" not in err[0] and "column_map" not in err[0]
    assert not out.exists() and not list(tmp_path.glob(".out*"))


@pytest.mark.parametrize("content, words", [
    (b"\x00\x01\x02binary\xff\xfe", ["UTF-8", "0xff"]),
    ("seed = 1\n# r\xe9sum\xe9\n".encode("latin-1"), ["UTF-8", "0xe9"]),
    (b"seed = = 1\n", ["invalid TOML"]),
], ids=["binary", "latin-1", "syntax"])
def test_unreadable_toml_is_one_line(folder, tmp_path, capsys, content, words):
    config = folder / "raw.toml"
    config.write_bytes(content)
    code, err = run_cli(["fit", "--config", config, "--out", tmp_path / "out"], capsys)
    assert code == 2 and len(err) == 1 and str(config) in err[0]
    assert all(word in err[0] for word in words), err[0]


def test_toml_directory_is_named_as_a_directory(folder, tmp_path, capsys):
    code, err = run_cli(["nulltest", "--config", folder / "a_folder.csv", "--out", tmp_path / "o"], capsys)
    assert code == 2 and len(err) == 1 and "is a directory" in err[0]


CATALOGUE_CASES = [
    ("z-in-km", "z_km.ecsv", ["column 'z'", "dimensionless", "km"]),
    ("two-z-columns", "two_z.csv", ["column 'z'", "twice"]),
    ("boolean-errors", "bool_err.ecsv", ["column 'log_mbh_err'", "row 1", "true/false"]),
    ("fits-vector", "vector.fits", ["column 'z'", "one value per row"]),
    ("fits-nan", "nan.fits", ["row 5", "column 'log_mstar'", "value nan", "finite"]),
    ("parquet-list", "list.parquet", ["column 'z'", "one value per row"]),
    ("directory", "a_folder.csv", ["is a directory"]),
]


@pytest.mark.parametrize("name, words", [case[1:] for case in CATALOGUE_CASES],
                         ids=[case[0] for case in CATALOGUE_CASES])
def test_bad_catalogue_is_one_line_naming_file_and_column(folder, tmp_path, capsys, name, words):
    out = tmp_path / "new" / "out"
    code, err = run_cli(["fit", folder / name, folder / "far.csv", "--out", out, "--quiet"], capsys)
    assert code == 2 and len(err) == 1, err
    assert name in err[0]
    for word in words:
        assert word in err[0], (word, err[0])
    assert list(tmp_path.iterdir()) == []  # not even the parent folder of --out


COMMAND_CASES = [
    ("seed-negative", lambda d: ["fit", d / "local.csv", "--seed", "-1"], ["--seed", "-1"]),
    ("seed-text", lambda d: ["simulate", "--config", d / "x.toml", "--seed", "abc"], ["--seed", "abc"]),
    ("out-is-a-file", lambda d: ["fit", d / "local.csv", d / "far.csv", "--out", d / "not_a_folder"],
     ["--out", "is a file"]),
    ("out-unwritable", lambda d: ["fit", d / "local.csv", d / "far.csv", "--out", d / "not_a_folder" / "sub"],
     ["--out", "cannot write"]),
    ("budget-k-huge", lambda d: ["budget", "--k", "1e9", "--out", d / "b"], ["--k", "1000000000"]),
    ("budget-eps-above-1", lambda d: ["budget", "--k", "3", "--eps-bh", "5", "--out", d / "b"], ["--eps-bh", "<= 1"]),
    ("budget-into-other-results", lambda d: ["budget", "--k", "3", "--out", d], ["--out", "budget.json"]),
    ("remnants-z-form-huge", lambda d: ["remnants", d / "remnants.csv", "--k", "1", "--out", d / "r"],
     ["remnants.csv", "row 1", "z_form", "1e300"]),
    ("challenge-claim-nan", lambda d: ["challenge", "--config", d / "case.toml", "--claim", "nan", "--out", d / "c"],
     ["--claim", "nan"]),
    ("nulltest-alpha", lambda d: ["nulltest", "--config", d / "case.toml", "--alpha", "2", "--out", d / "n"],
     ["--alpha"]),
    ("unknown-option", lambda d: ["fit", d / "local.csv", "--sead", "1"], ["--sead"]),
]


@pytest.mark.parametrize("argv, words", [case[1:] for case in COMMAND_CASES], ids=[case[0] for case in COMMAND_CASES])
def test_bad_option_is_one_line(folder, capsys, argv, words):
    toml(folder, "case.toml", GOOD)
    before = sorted(p.name for p in folder.iterdir())
    code, err = run_cli(argv(folder), capsys)
    assert code == 2 and len(err) == 1, err
    for word in words:
        assert word in err[0], (word, err[0])
    assert sorted(p.name for p in folder.iterdir()) == before  # nothing written, no staging folder


def test_inject_with_nan_grid_names_the_campaign_file(folder, tmp_path, capsys):
    toml(folder, "run_design.toml", GOOD)
    campaign = toml(folder, "campaign.toml", 'design = "run_design.toml"\n[grid]\nk = [nan]\n')
    code, err = run_cli(["inject", "--config", campaign, "--out", tmp_path / "c"], capsys)
    assert code == 2 and len(err) == 1 and str(campaign) in err[0] and "grid.k" in err[0]


def test_simulate_error_names_the_simulator_file(folder, tmp_path, capsys):
    sim = toml(folder, "sim.toml", '[truth]\nk = "one"\n[[sample]]\nname = "a"\nn = 5\nz_range = [0, 1]\n'
                                   'method = "virial"\n')
    code, err = run_cli(["simulate", "--config", sim, "--out", tmp_path / "s"], capsys)
    assert code == 2 and len(err) == 1 and str(sim) in err[0] and "truth.k" in err[0]
    assert not (tmp_path / "s").exists()


def test_bom_and_categorical_columns_are_read(folder, tmp_path):
    from cosmogrow.data.readers import read_catalog

    bom = tmp_path / "bom.csv"
    bom.write_bytes(b"\xef\xbb\xbf" + (folder / "local.csv").read_bytes())
    frame = pd.read_csv(folder / "local.csv")
    frame["method"] = pd.Categorical(["dynamical", "virial"] * (len(frame) // 2))
    frame.to_parquet(tmp_path / "cat.parquet")
    plain, _ = read_catalog(folder / "local.csv")
    np.testing.assert_array_equal(read_catalog(bom)[0].ids, plain.ids)
    assert read_catalog(tmp_path / "cat.parquet")[0].method_names == ("dynamical", "virial")


def test_bom_in_toml_is_read(folder):
    from cosmogrow.config import read_run_config

    path = folder / "bom.toml"
    path.write_bytes(b"\xef\xbb\xbf" + b"seed = 4\n")
    assert read_run_config(path).seed == 4


def test_remnants_help_shows_a_percent_sign(capsys):
    with pytest.raises(SystemExit):
        main(["remnants", "--help"])
    text = capsys.readouterr().out
    assert "95 %" in text and "%%" not in text


def test_failed_mocks_give_exit_3_with_their_count(folder, tmp_path, capsys, monkeypatch):
    """The campaign is replaced by one whose second mock failed: the command counts it."""
    import cosmogrow.cli.commands.inject as inject
    from cosmogrow.campaigns.runner import CampaignResult

    class Serial:
        description = "in-process"

        def close(self):
            pass

    def fake_campaign(context, out, executor, on_progress=None):
        rows = pd.DataFrame({"k_true": [0.0, 0.0], "error": ["", "ValueError: no finite MAP"]})
        return CampaignResult(results=rows, summary={"recovery": {}, "sbc": {}})

    monkeypatch.setattr(inject, "run_campaign", fake_campaign)
    monkeypatch.setattr(inject, "make_executor", lambda **kwargs: Serial())
    monkeypatch.setattr(inject, "write_campaign_outputs", lambda stage, result: (stage / "summary.json").write_text("{}"))
    toml(folder, "run_design.toml", GOOD)
    campaign = toml(folder, "campaign_ok.toml", 'seed = 1\ndesign = "run_design.toml"\n[grid]\nk = [0]\n'
                                                'realisations = 2\n')
    code, err = run_cli(["inject", "--config", campaign, "--out", tmp_path / "c", "--quiet"], capsys)
    assert code == 3
    assert err == [f"cosmogrow inject: 1 of 2 mock fits failed (see the 'error' column of "
                   f"{tmp_path / 'c' / 'results.parquet'})"]


def test_library_runtime_warnings_do_not_reach_the_user(capsys, monkeypatch):
    import warnings

    import cosmogrow.cli.commands.budget as budget

    def noisy(args):
        warnings.warn("overflow encountered in power", RuntimeWarning)
        return 0

    monkeypatch.setattr(budget, "run", noisy)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        code, err = run_cli(["budget", "--k", "1", "--out", "unused"], capsys)
    assert code == 0 and err == [] and caught == []
