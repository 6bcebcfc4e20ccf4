"""`cosmogrow fit` end to end: verdicts first in summary.md, claims, threshold, exit 3 when k is
not identified, warnings for undeclared methods (docs/method.md#verdicts)."""

import json

import numpy as np
import pytest

from cosmogrow.cli.dispatch import main
from cosmogrow.data.catalog import Catalog

from mocks import mock_catalog, write_csv

VERDICT_KEYS = {"k_ref", "verdict", "sigma", "sigma_range", "reason"}


@pytest.fixture(scope="module")
def confounded(tmp_path_factory):
    """Truth k = 0: local dynamical masses, distant virial masses carrying +0.45 dex."""
    folder = tmp_path_factory.mktemp("confounded")
    cat = mock_catalog(np.random.default_rng(8), 0.0, samples=((0.02, 60, "dynamical"), (1.5, 80, "virial")),
                       offsets={"virial": 0.45}, z_spread=0.03)
    paths = [write_csv(cat.subset(cat.sample == name), folder / f"{name}.csv") for name in ("S0", "S1")]
    config = folder / "run.toml"
    config.write_text('[model]\nzero_point_method = "dynamical"\n[verdicts]\nclaims = [1.5]\n')
    return folder, config, paths


def test_confounded_fit_says_depends_on_assumptions_first(confounded, tmp_path):
    _, config, paths = confounded
    out = tmp_path / "res"
    code = main(["fit", *map(str, paths), "--config", str(config), "--out", str(out), "--seed", "3",
                 "--quiet", "--claim", "2", "--claim", "1.5"])
    assert code == 0
    summary = json.loads((out / "summary.json").read_text())
    verdicts = summary["verdicts"]
    assert [row["k_ref"] for row in verdicts] == [0.0, 3.0, 1.5, 2.0]
    assert all(VERDICT_KEYS <= set(row) for row in verdicts)
    k3 = verdicts[1]
    assert k3["verdict"] == "depends on assumptions"
    assert summary["tests"]["significance_method"] == "profile likelihood, offsets constrained by N(0, 0.3 dex)"
    assert summary["tests"]["bayes_factor_prior_width"] == 20.0
    assert len(summary["sensitivity"]) == 6 and summary["identifiability"]["identified"] is True
    text = (out / "summary.md").read_text()
    first = text.split("\n")[2]
    assert first.startswith("**Verdicts: k = 0:") and "k = 3: depends on assumptions (" in first
    # never a lone σ for k = 3: the tests table shows its range beside it
    assert "σ: depends on assumptions)" in text
    assert "| offsets constrained by N(0, 0.1 dex) |" in text and "k prior [-5, 5] (W = 10)" in text


def test_threshold_option_moves_the_verdict(confounded, tmp_path):
    _, config, paths = confounded
    out = tmp_path / "low"
    assert main(["fit", *map(str, paths), "--config", str(config), "--out", str(out), "--seed", "3",
                 "--quiet", "--threshold", "0.5"]) == 0
    summary = json.loads((out / "summary.json").read_text())
    assert all(row["threshold"] == 0.5 for row in summary["verdicts"])
    assert summary["verdicts"][1]["verdict"] == "excluded"   # σ ≥ 0.5 at every width


def test_bad_threshold_is_one_line_exit_2(confounded, tmp_path, capsys):
    folder, _, paths = confounded
    bad = folder / "bad.toml"
    bad.write_text("[verdicts]\nthreshold = -2\n")
    out = tmp_path / "bad"
    assert main(["fit", *map(str, paths), "--config", str(bad), "--out", str(out), "--quiet"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "verdicts.threshold" in err[0] and "-2" in err[0]
    assert not out.exists()


def test_one_redshift_is_flagged_and_exits_3(tmp_path):
    rng = np.random.default_rng(2)
    n = 40
    cat = Catalog.from_columns(z=np.full(n, 0.5), log_mbh=rng.normal(8.5, 0.3, n), log_mbh_err=np.full(n, 0.1),
                               log_mstar=rng.normal(11, 0.3, n), log_mstar_err=np.full(n, 0.1),
                               sample="only", method="dynamical", ids=[str(i) for i in range(n)])
    path = write_csv(cat, tmp_path / "one.csv")
    config = tmp_path / "short.toml"
    config.write_text("[sampler]\nmax_steps = 600\ncheck_every = 200\n")
    out = tmp_path / "res"
    assert main(["fit", str(path), "--config", str(config), "--out", str(out), "--seed", "1", "--quiet"]) == 3
    summary = json.loads((out / "summary.json").read_text())
    assert summary["identifiability"]["identified"] is False
    assert any("one redshift" in reason for reason in summary["identifiability"]["reasons"])
    assert summary["warnings"][0].startswith("k is not identified")


def test_undeclared_methods_warned_in_the_fit(tmp_path):
    cat = mock_catalog(np.random.default_rng(4), 0.0, samples=((0.02, 40, "unspecified"),
                                                                 (1.0, 40, "unspecified")))
    paths = [write_csv(cat.subset(cat.sample == name), tmp_path / f"{name}.csv") for name in ("S0", "S1")]
    out = tmp_path / "res"
    assert main(["fit", *map(str, paths), "--out", str(out), "--seed", "1", "--quiet"]) == 0
    summary = json.loads((out / "summary.json").read_text())
    assert any("absorbed into k" in line for line in summary["warnings"])
