"""`cosmogrow simulate` end to end through cosmogrow.cli.main."""

import json

from cosmogrow.data.readers import read_catalog
from cosmogrow.cli.dispatch import main

CONFIG = """
seed = 7

[truth]
k = 1.0
delta = { virial = 0.2 }

[[sample]]
name = "local"
n = 120
z_range = [0.0, 0.03]
method = "dynamical"
selection = { kind = "sphere_of_influence" }

[[sample]]
name = "far"
n = 80
z_range = [1.0, 2.0]
method = "virial"
selection = [{ kind = "flux_limit", flux_limit = 1e-13 }, { kind = "host_mass_cut", log_mstar_min = 10.5 }]
"""


def test_simulate_writes_catalogues_and_truth(tmp_path, capsys):
    config = tmp_path / "sim.toml"
    config.write_text(CONFIG)
    out = tmp_path / "mocks"
    assert main(["simulate", "--config", str(config), "--out", str(out)]) == 0
    assert sorted(p.name for p in out.iterdir()) == ["far.csv", "local.csv", "truth.json"]
    truth = json.loads((out / "truth.json").read_text())
    assert truth["seed"] == 7 and truth["k"] == 1.0 and truth["delta"] == {"virial": 0.2}
    assert [s["name"] for s in truth["samples"]] == ["local", "far"]
    local, _ = read_catalog(out / "local.csv")
    far, _ = read_catalog(out / "far.csv")
    assert len(local) == 120 and len(far) == 80
    assert set(far.method) == {"virial"} and far.log_mstar.min() >= 10.5
    assert "local: 120 objects" in capsys.readouterr().out

    again = tmp_path / "again"
    assert main(["simulate", "--config", str(config), "--out", str(again), "--seed", "3"]) == 0
    assert json.loads((again / "truth.json").read_text())["seed"] == 3
    assert (again / "far.csv").read_text() != (out / "far.csv").read_text()


def test_simulate_bad_config_writes_nothing(tmp_path, capsys):
    config = tmp_path / "sim.toml"
    config.write_text(CONFIG.replace("n = 80", "n = -80"))
    out = tmp_path / "mocks"
    assert main(["simulate", "--config", str(config), "--out", str(out)]) == 2
    assert "sample 'far': key 'n': expected a positive integer, got -80" in capsys.readouterr().err
    assert not out.exists() and list(tmp_path.iterdir()) == [config]
    assert main(["simulate", "--config", str(tmp_path / "missing.toml"), "--out", str(out)]) == 2
    assert "configuration file not found" in capsys.readouterr().err
    assert not out.exists()
