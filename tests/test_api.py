"""The Python API: every public name resolves, and a fit from DataFrames is the command's fit."""

import json

import numpy as np
import pytest

import cosmogrow
from cosmogrow.cli import main
from tests.mocks import mock_catalog


def test_every_public_name_resolves_with_a_docstring():
    for name in cosmogrow.__all__:
        value = getattr(cosmogrow, name)
        assert name == "__version__" or value.__doc__, name
    with pytest.raises(AttributeError, match="no attribute 'nope'"):
        cosmogrow.nope


def _two_frames(seed=3):
    catalog = mock_catalog(np.random.default_rng(seed), 1.0,
                           samples=((0.02, 40, "dynamical"), (1.2, 40, "dynamical")))
    frame = catalog.to_dataframe()
    return {name: frame[frame["sample"] == name].drop(columns="sample") for name in ("S0", "S1")}


def test_fit_from_dataframes_equals_the_command_on_the_same_files(tmp_path):
    frames = _two_frames()
    config = cosmogrow.run_config([{"name": name, "data": frame} for name, frame in frames.items()],
                                  seed=5, sampler={"max_steps": 2000})
    result = cosmogrow.fit(config)
    for name, frame in frames.items():
        frame.to_csv(tmp_path / f"{name}.csv", index=False)
    (tmp_path / "run.toml").write_text('seed = 5\n[sampler]\nmax_steps = 2000\n'
                                       '[[sample]]\nname = "S0"\npath = "S0.csv"\n'
                                       '[[sample]]\nname = "S1"\npath = "S1.csv"\n')
    assert main(["fit", "--config", str(tmp_path / "run.toml"), "--out", str(tmp_path / "out"),
                 "--quiet"]) in (0, 3)
    on_files = json.loads((tmp_path / "out" / "summary.json").read_text())
    assert result.summary["k"]["median"] == pytest.approx(on_files["k"]["median"], rel=1e-12)
    assert [v["verdict"] for v in result.summary["verdicts"]] == [v["verdict"] for v in on_files["verdicts"]]
    assert result.summary["inputs"][0]["path"] == "DataFrame 'S0'"


def test_a_bad_cell_in_a_dataframe_is_named_like_a_file_row():
    frames = _two_frames()
    frames["S1"] = frames["S1"].reset_index(drop=True)
    frames["S1"].loc[2, "z"] = -0.5
    config = cosmogrow.run_config([{"name": name, "data": frame} for name, frame in frames.items()])
    with pytest.raises(cosmogrow.InputError, match=r"^DataFrame 'S1', row 3, column 'z', value -0.5: "):
        cosmogrow.fit(config)


def test_run_config_refuses_a_sample_without_data():
    with pytest.raises(cosmogrow.ConfigError, match=r"sample\[1\]: missing key 'data'"):
        cosmogrow.run_config([{"name": "local"}])
