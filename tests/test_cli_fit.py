"""`cosmogrow fit` end to end on tiny catalogues: exit codes 0, 2, 3; reproducible from the seed."""

import json

import numpy as np
import pytest

from cosmogrow.cli.dispatch import main

from mocks import mock_catalog, write_csv


@pytest.fixture(scope="module")
def catalogues(tmp_path_factory):
    folder = tmp_path_factory.mktemp("cats")
    cat = mock_catalog(np.random.default_rng(7), 2.0, samples=((0.02, 50, "dynamical"), (1.2, 50, "dynamical")))
    local = write_csv(cat.subset(cat.sample == "S0"), folder / "local.csv")
    far = write_csv(cat.subset(cat.sample == "S1"), folder / "far.csv")
    return folder, local, far


def test_fit_writes_results_and_exits_0(catalogues, tmp_path, capsys):
    _, local, far = catalogues
    out = tmp_path / "res"
    assert main(["fit", str(local), str(far), "--out", str(out), "--seed", "5", "--quiet"]) == 0
    for name in ("summary.json", "summary.md", "chain.h5", "samples.npz", "corner.png", "relation.png",
                 "offsets.png"):
        assert (out / name).is_file(), name
    summary = json.loads((out / "summary.json").read_text())
    k = summary["k"]
    assert k["interval68"][0] < k["median"] < k["interval68"][1]
    assert k["interval95"][0] < k["interval68"][0]
    assert summary["convergence"]["converged"] is True
    assert summary["convergence"]["n_steps"] > 50 * summary["convergence"]["tau_max"]
    assert 0 <= summary["tests"]["p_k_le_0"] <= 1
    assert summary["tests"]["sigma_vs_k0"] > 0
    assert [f["rows"] for f in summary["inputs"]] == [50, 50]
    assert len(summary["inputs"][0]["sha256"]) == 64
    assert summary["seed"] == 5 and summary["versions"]["emcee"]
    assert "k =" in capsys.readouterr().out


def test_same_seed_same_numbers(catalogues, tmp_path):
    _, local, far = catalogues
    runs = []
    for name in ("a", "b"):
        out = tmp_path / name
        assert main(["fit", str(local), str(far), "--out", str(out), "--seed", "11", "--quiet"]) == 0
        summary = json.loads((out / "summary.json").read_text())
        runs.append({key: summary[key] for key in ("k", "tests", "parameters", "convergence")})
    assert runs[0] == runs[1]


def test_not_converged_exits_3_and_flags(catalogues, tmp_path):
    folder, local, far = catalogues
    config = folder / "short.toml"
    config.write_text("[sampler]\nmax_steps = 100\ncheck_every = 50\n")
    out = tmp_path / "short"
    code = main(["fit", str(local), str(far), "--config", str(config), "--out", str(out), "--seed", "1", "--quiet"])
    assert code == 3
    summary = json.loads((out / "summary.json").read_text())
    assert summary["convergence"]["converged"] is False
    assert "did not converge" in summary["warnings"][0]


def test_bad_catalogue_exits_2_with_one_line_and_writes_nothing(catalogues, tmp_path, capsys):
    folder, local, _ = catalogues
    bad = folder / "bad.csv"
    text = local.read_text().splitlines()
    fields = text[3].split(",")
    fields[1] = "-0.5"  # redshift of data row 3
    text[3] = ",".join(fields)
    bad.write_text("\n".join(text) + "\n")
    out = tmp_path / "never"
    assert main(["fit", str(local), str(bad), "--out", str(out), "--quiet"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1
    assert "bad.csv" in err and "row 3" in err and "'z'" in err and "-0.5" in err
    assert not out.exists()
    assert not list(tmp_path.glob(".never*"))


def test_bad_configuration_exits_2(catalogues, tmp_path, capsys):
    folder, local, far = catalogues
    config = folder / "bad.toml"
    config.write_text("[model]\nform = 'quadratic'\n")
    assert main(["fit", str(local), str(far), "--config", str(config), "--out", str(tmp_path / "x")]) == 2
    assert "model.form: expected one of ratio, relation, got 'quadratic'" in capsys.readouterr().err


def test_no_catalogue_exits_2(tmp_path, capsys):
    assert main(["fit", "--out", str(tmp_path / "x")]) == 2
    assert "no catalogues given" in capsys.readouterr().err


def test_degenerate_offset_is_reported(tmp_path):
    rng = np.random.default_rng(2)
    cat = mock_catalog(rng, 1.0, samples=((0.02, 40, "dynamical"), (1.0, 40, "virial")))
    local = write_csv(cat.subset(cat.sample == "S0"), tmp_path / "local.csv")
    far = write_csv(cat.subset(cat.sample == "S1"), tmp_path / "far.csv")
    out = tmp_path / "deg"
    main(["fit", str(local), str(far), "--out", str(out), "--seed", "3", "--quiet"])
    summary = json.loads((out / "summary.json").read_text())
    assert any("degenerate with the offset of method 'virial'" in w for w in summary["warnings"])
    widths = summary["degeneracy"]["offset_prior_sensitivity"]
    stds = [row["k_std"] for row in widths]
    # the width of k follows the offset prior: sd(k) ≈ sd(delta)/log10(2) when the offset is free
    assert stds == sorted(stds) and stds[-1] > 3 * stds[0]


def test_resume_continues_the_chain(catalogues, tmp_path):
    import h5py

    folder, local, far = catalogues
    short = folder / "cap200.toml"
    short.write_text("[sampler]\nmax_steps = 200\ncheck_every = 100\n")
    out = tmp_path / "resumable"
    args = ["fit", str(local), str(far), "--out", str(out), "--seed", "4", "--quiet"]
    assert main(args + ["--config", str(short)]) == 3
    with h5py.File(out / "chain.h5") as f:
        assert f["mcmc"].attrs["iteration"] == 200
    assert main(args + ["--resume"]) == 0
    summary = json.loads((out / "summary.json").read_text())
    with h5py.File(out / "chain.h5") as f:
        assert f["mcmc"].attrs["iteration"] == summary["convergence"]["n_steps"] > 200
        assert np.all(np.isfinite(f["mcmc"]["chain"][:]))


def test_duplicate_id_across_files_exits_2_naming_both(catalogues, tmp_path, capsys):
    folder, local, _ = catalogues
    copy = folder / "copy.csv"
    copy.write_text(local.read_text())
    assert main(["fit", str(local), str(copy), "--out", str(tmp_path / "dup"), "--quiet"]) == 2
    err = capsys.readouterr().err.strip()
    assert "copy.csv, row 1, column 'id'" in err and f"also in {local} row 1" in err
    assert not (tmp_path / "dup").exists()
