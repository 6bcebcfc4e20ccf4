"""Survival of a claimed k: an undeclared cut is caught, a declared one lets the truth survive.

Planted case: k = 0 data whose high-z sample kept only log M_BH > 8.5. Declaring no cut, the data
look like k < 0, and neither k = 0 nor k = 3 survives; declaring the cut, k = 0 (the truth)
survives, k = 3 does not, and the plain fits of k = 0 mocks show the bias the cut causes.
"""

import json

import numpy as np
import pytest

from cosmogrow import background
from cosmogrow.checks.challenge import challenge_claim
from cosmogrow.cli.dispatch import main
from cosmogrow.config import RunConfig
from cosmogrow.errors import ConfigError
from cosmogrow.inference.fit import FitData
from cosmogrow.selection.compiled import build_selection

from mocks import mock_catalog, write_csv

COSMO = background.get_cosmology(None)
CUT = 8.5
REPLICAS = 20
DECLARED = {"S1": {"kind": "mass_cut", "log_mbh_min": CUT}}


def cut_catalog(k=0.0, seed=3):
    cat = mock_catalog(np.random.default_rng(seed), k, samples=((0.03, 120, "dyn"), (1.0, 400, "dyn")))
    return cat.subset((cat.sample == "S0") | (cat.log_mbh > CUT))


def data_of(catalog, selections=None):
    """FitData as `fit.load_data` builds it: selections compiled into models per sample."""
    models = {name: list(build_selection(spec)) for name, spec in (selections or {}).items()}
    return FitData(catalog=catalog, files=[], selections=models, cosmology=COSMO)


def test_undeclared_cut_rejects_the_truth():
    result = challenge_claim(RunConfig(), data_of(cut_catalog()), 3.0, replicas=REPLICAS, seed=1)
    assert result["observed"]["selection_aware"]["k"] < -0.3
    assert result["verdict"]["null"]["consistent"] is False
    assert result["verdict"]["claim"]["consistent"] is False
    assert "no selection is declared" in result["verdict"]["null"]["text"]


def test_declared_cut_lets_the_truth_survive_and_shows_the_plain_bias():
    result = challenge_claim(RunConfig(), data_of(cut_catalog(), DECLARED), 3.0, replicas=REPLICAS, seed=1)
    verdict = result["verdict"]
    assert verdict["null"]["consistent"] is True and verdict["claim"]["consistent"] is False
    assert verdict["claim"]["text"].startswith("A claimed k = 3 is not consistent with these data once "
                                               "their selection is modelled")
    null = result["hypotheses"]["null"]
    plain, aware = null["plain"], null["selection_aware"]
    spread = np.std(aware["k"], ddof=1)
    assert abs(aware["bias"]) < 3 * spread / np.sqrt(REPLICAS) + 0.05
    assert plain["bias"] < -0.3  # ignoring the cut drags k below 0
    assert result["hypotheses"]["claim"]["selection_aware"]["median"] == pytest.approx(3.0, abs=0.4)
    assert len(aware["k"]) == REPLICAS and aware["n_failed"] == 0


def test_a_true_claim_survives():
    # k = 2 data, cut declared: k = 2 survives, k = 0 does not
    cat = cut_catalog(k=2.0, seed=8)
    result = challenge_claim(RunConfig(), data_of(cat, DECLARED), 2.0, replicas=12, seed=2)
    assert result["verdict"]["claim"]["consistent"] is True
    assert result["verdict"]["null"]["consistent"] is False


@pytest.mark.parametrize("kwargs, message", [
    ({"replicas": 2}, "--replicas: expected an integer >= 3"),
    ({"mode": "exact"}, "--mode: expected one of fast, mcmc"),
    ({"alpha": 0.0}, "--alpha: expected 0 < alpha < 0.5"),
    ({"claim": float("nan")}, "--claim: expected a finite number"),
    ({"claim": 12.0}, r"k = 12 is outside the prior range of k \[-10, 10\]"),
])
def test_bad_settings_are_config_errors(kwargs, message):
    cat = mock_catalog(np.random.default_rng(4), 0.0, samples=((0.02, 20, "d"), (1.0, 20, "d")))
    kwargs = {"claim": 3.0, "replicas": 3, **kwargs}
    claim = kwargs.pop("claim")
    with pytest.raises(ConfigError, match=message):
        challenge_claim(RunConfig(), data_of(cat), claim, **kwargs)


def write_run(folder, catalog, selection=""):
    for name in catalog.sample_names:
        write_csv(catalog.subset(catalog.sample == name), folder / f"{name}.csv")
    text = "seed = 5\n" + "".join(f'[[sample]]\nname = "{n}"\npath = "{n}.csv"\n'
                                  for n in catalog.sample_names)
    (folder / "run.toml").write_text(text + selection)
    return folder / "run.toml"


def test_cli_writes_results(tmp_path, capsys):
    config = write_run(tmp_path, cut_catalog(),
                       f'selection = {{ kind = "mass_cut", log_mbh_min = {CUT} }}\n')
    out = tmp_path / "ch"
    assert main(["challenge", "--config", str(config), "--claim", "3", "--out", str(out),
                 "--replicas", "6", "--quiet"]) == 0
    for name in ("challenge.json", "challenge.png", "summary.md"):
        assert (out / name).is_file(), name
    result = json.loads((out / "challenge.json").read_text())
    assert result["claim"] == 3.0 and result["selection_declared"] is True
    assert set(result["hypotheses"]) == {"claim", "null"}
    assert "A claimed k = 3 is" in capsys.readouterr().out


@pytest.mark.parametrize("args, message", [
    (["--claim", "30"], "k = 30 is outside the prior range of k"),
    (["--claim", "3", "--replicas", "2"], "--replicas: expected an integer >= 3"),
])
def test_cli_bad_input_exits_2_and_writes_nothing(tmp_path, capsys, args, message):
    config = write_run(tmp_path, mock_catalog(np.random.default_rng(5), 0.0,
                                              samples=((0.02, 20, "d"), (1.0, 20, "d"))))
    out = tmp_path / "ch"
    assert main(["challenge", "--config", str(config), "--out", str(out), "--quiet", *args]) == 2
    err = capsys.readouterr().err.strip()
    assert message in err and len(err.splitlines()) == 1
    assert not out.exists()


def test_cli_missing_config_file_exits_2(tmp_path, capsys):
    out = tmp_path / "ch"
    assert main(["challenge", "--config", str(tmp_path / "none.toml"), "--claim", "3", "--out",
                 str(out)]) == 2
    assert "configuration file not found" in capsys.readouterr().err
    assert not out.exists()
