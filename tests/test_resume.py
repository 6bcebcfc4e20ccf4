"""Output folders and `fit --resume`: a folder holds one command's results, replaced whole with
--force; a chain is continued only for the same inputs, configuration and seed, also after kill -9;
`init` writes a configuration that fits what the catalogues alone fit."""

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import h5py
import numpy as np
import pytest

from cosmogrow.cli.dispatch import main

from mocks import mock_catalog, write_csv, write_samples

ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture(scope="module")
def cats(tmp_path_factory):
    folder = tmp_path_factory.mktemp("resume")
    cat = mock_catalog(np.random.default_rng(11), 1.0, samples=((0.02, 50, "dynamical"), (1.2, 50, "dynamical")))
    write_samples(cat, folder, ("local.csv", "far.csv"))
    other = mock_catalog(np.random.default_rng(12), 0.0, samples=((1.2, 50, "dynamical"),))
    write_csv(other, folder / "other.csv")
    return folder


def fit(cats, out, *extra, capsys=None, files=("local.csv", "far.csv")):
    code = main(["fit", *[str(cats / f) for f in files], "--out", str(out), "--quiet", *map(str, extra)])
    err = capsys.readouterr().err.strip().splitlines() if capsys else []
    return code, err


def summary(out):
    return json.loads((out / "summary.json").read_text())


def siblings(out):
    return sorted(p.name for p in out.parent.iterdir() if p.name.startswith(f".{out.name}."))


def test_second_run_refused_then_force_replaces_the_folder_whole(cats, tmp_path, capsys):
    out = tmp_path / "res"
    assert fit(cats, out, "--seed", "2", capsys=capsys)[0] == 0
    code, err = fit(cats, out, "--seed", "2", capsys=capsys)
    assert code == 2 and len(err) == 1 and "--force" in err[0] and str(out) in err[0]
    (out / "left_over.txt").write_text("from before\n")
    (tmp_path / ".res.stage-killed").mkdir()  # what a killed fit leaves beside --out
    (tmp_path / ".res.stage-killed" / "chain.h5").write_bytes(b"partial")
    assert fit(cats, out, "--seed", "3", "--force", capsys=capsys)[0] == 0
    assert not (out / "left_over.txt").exists() and summary(out)["seed"] == 3
    assert siblings(out) == []


def test_resume_refuses_another_data_set(cats, tmp_path, capsys):
    out = tmp_path / "res"
    assert fit(cats, out, "--seed", "4", capsys=capsys)[0] == 0
    before = (out / "summary.json").read_bytes()
    code, err = fit(cats, out, "--seed", "4", "--resume", capsys=capsys, files=("far.csv", "other.csv"))
    assert code == 2 and len(err) == 1
    assert "chain.h5" in err[0] and "other inputs, configuration or seed" in err[0]
    code, err = fit(cats, out, "--seed", "5", "--resume", capsys=capsys)  # another seed: refused too
    assert code == 2 and "chain.h5" in err[0]
    assert (out / "summary.json").read_bytes() == before


def test_resume_at_max_steps_is_refused_naming_the_key(cats, tmp_path, capsys):
    config = tmp_path / "short.toml"
    config.write_text("[sampler]\nmax_steps = 100\ncheck_every = 50\n")
    out = tmp_path / "res"
    assert fit(cats, out, "--config", config, "--seed", "6", capsys=capsys)[0] == 3
    before = (out / "summary.json").read_bytes()
    code, err = fit(cats, out, "--config", config, "--resume", capsys=capsys)  # seed found in the chain
    assert code == 2 and len(err) == 1
    assert "100 steps" in err[0] and "sampler.max_steps" in err[0] and str(config) in err[0]
    assert (out / "summary.json").read_bytes() == before
    # raising the cap continues the same chain: its first 100 steps are kept
    with h5py.File(out / "chain.h5") as handle:
        head = handle["mcmc/chain"][:100].copy()
    config.write_text("[sampler]\nmax_steps = 20000\ncheck_every = 50\n")
    assert fit(cats, out, "--config", config, "--resume", capsys=capsys)[0] == 0
    assert summary(out)["convergence"]["n_steps"] > 100
    with h5py.File(out / "chain.h5") as handle:
        np.testing.assert_array_equal(handle["mcmc/chain"][:100], head)


def test_corrupt_chain_is_refused(cats, tmp_path, capsys):
    out = tmp_path / "res"
    assert fit(cats, out, "--seed", "7", capsys=capsys)[0] == 0
    (out / "chain.h5").write_bytes(b"not an HDF5 file")
    code, err = fit(cats, out, "--seed", "7", "--resume", capsys=capsys)
    assert code == 2 and len(err) == 1 and "chain.h5" in err[0] and "cannot read" in err[0]


def test_init_then_fit_config_gives_the_same_k(cats, tmp_path, capsys):
    config = tmp_path / "cfg" / "run.toml"
    files = [str(cats / "local.csv"), str(cats / "far.csv")]
    assert main(["init", *files, "--out", str(config), "--seed", "9"]) == 0
    text = config.read_text()
    assert "[[sample]]" in text and "mass_cut" in text and "flux_limit" in text
    assert main(["fit", "--config", str(config), "--out", str(tmp_path / "a"), "--quiet"]) == 0
    assert main(["fit", *files, "--seed", "9", "--out", str(tmp_path / "b"), "--quiet"]) == 0
    assert summary(tmp_path / "a")["k"] == summary(tmp_path / "b")["k"]
    assert main(["init", *files, "--out", str(config)]) == 2  # no silent overwrite


def _chain_steps(path):
    try:
        with h5py.File(path, "r") as handle:
            return int(handle["mcmc"].attrs["iteration"])
    except (OSError, KeyError):
        return 0


@pytest.mark.slow
def test_kill_9_then_resume_matches_an_uninterrupted_run(cats, tmp_path):
    config = tmp_path / "long.toml"
    config.write_text("seed = 13\n[sampler]\nautocorr_factor = 300\ncheck_every = 50\n")
    files = [str(cats / "local.csv"), str(cats / "far.csv")]
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    out = tmp_path / "killed"
    argv = [sys.executable, "-m", "cosmogrow.cli", "fit", *files, "--config", str(config), "--quiet"]
    process = subprocess.Popen([*argv, "--out", str(out)], env=env, stdout=subprocess.DEVNULL,
                               stderr=subprocess.DEVNULL)
    deadline = time.monotonic() + 300  # generous: a loaded machine starts slowly
    steps = 0
    while time.monotonic() < deadline and process.poll() is None:
        stages = list(tmp_path.glob(".killed.stage-*/chain.h5"))
        steps = max([_chain_steps(p) for p in stages] + [0])
        if steps >= 200:
            break
        time.sleep(0.05)
    assert process.poll() is None, "the fit ended before it could be killed"
    os.kill(process.pid, signal.SIGKILL)
    process.wait()
    assert not out.exists() and list(tmp_path.glob(".killed.stage-*"))
    resumed = subprocess.run([*argv, "--out", str(out), "--resume"], env=env, capture_output=True, text=True)
    assert resumed.returncode == 0, resumed.stderr
    assert "no chain" not in resumed.stderr
    straight = subprocess.run([*argv, "--out", str(tmp_path / "straight")], env=env, capture_output=True, text=True)
    assert straight.returncode == 0, straight.stderr
    a, b = summary(out), summary(tmp_path / "straight")
    assert a["convergence"]["n_steps"] == b["convergence"]["n_steps"] > steps
    assert a["k"] == b["k"] and a["parameters"] == b["parameters"]
    assert not list(tmp_path.glob(".killed.*"))  # the killed run's staging folder is gone


@pytest.mark.slow
def test_sigterm_removes_the_staging_folder(cats, tmp_path):
    config = tmp_path / "long.toml"
    config.write_text("seed = 13\n[sampler]\nautocorr_factor = 300\ncheck_every = 50\n")
    argv = [sys.executable, "-m", "cosmogrow.cli", "fit", str(cats / "local.csv"), str(cats / "far.csv"),
            "--config", str(config), "--quiet", "--out", str(tmp_path / "res")]
    process = subprocess.Popen(argv, env={**os.environ, "PYTHONPATH": str(ROOT)},
                               stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    deadline = time.monotonic() + 300  # generous: a loaded machine starts slowly
    while time.monotonic() < deadline and process.poll() is None:
        if any(_chain_steps(p) > 0 for p in tmp_path.glob(".res.stage-*/chain.h5")):
            break
        time.sleep(0.05)
    assert process.poll() is None, "the fit ended before it could be stopped"
    process.terminate()
    assert process.wait(timeout=60) == 128 + signal.SIGTERM
    assert sorted(p.name for p in tmp_path.iterdir()) == ["long.toml"]


def test_a_reader_of_the_chain_does_not_stop_the_fit(tmp_path):
    # a user (or a test) reading the chain of a running fit holds HDF5's shared lock; the fit's
    # next write must not fail on it (it did: "unable to lock file", and the fit ended)
    from cosmogrow.inference.mcmc import run_ensemble

    def log_prob(theta):
        return -0.5 * np.sum(np.atleast_2d(theta) ** 2, axis=1)

    path = tmp_path / "chain.h5"
    start = np.random.default_rng(0).normal(size=(8, 2))
    run_ensemble(log_prob, start, max_steps=20, check_every=10, chain_path=path, seed=1)
    holder = subprocess.Popen([sys.executable, "-c", "import h5py, sys, time\n"
                               f"handle = h5py.File({str(path)!r}, 'r')\nprint('open', flush=True)\ntime.sleep(30)"],
                              stdout=subprocess.PIPE, text=True)
    try:
        assert holder.stdout.readline().strip() == "open"
        result = run_ensemble(log_prob, start, max_steps=40, check_every=10, chain_path=path, seed=1)
        assert result.n_steps == 40 and _chain_steps(path) == 40
    finally:
        holder.kill()
        holder.wait()
