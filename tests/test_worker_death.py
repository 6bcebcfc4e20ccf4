"""Campaign workers end with their parent, however it dies: SIGKILL during the pool's start-up
(workers spawned but not yet initialised) and while they fit."""

import os
import signal
import subprocess
import sys
import time
import uuid
from pathlib import Path

import numpy as np
import pytest

from mocks import mock_catalog, write_csv

REPO = Path(__file__).resolve().parents[1]
TAG = "COSMOGROW_DEATH_TEST"


def tagged_processes(tag):
    """Pids of live processes whose environment carries TAG=tag (zombies excluded)."""
    found = []
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            if f"{TAG}={tag}".encode() not in (entry / "environ").read_bytes().split(b"\0"):
                continue
            if (entry / "stat").read_text().rsplit(")", 1)[1].split()[0] == "Z":
                continue
        except OSError:  # gone meanwhile, or not ours to read
            continue
        found.append(int(entry.name))
    return found


@pytest.fixture(scope="module")
def campaign(tmp_path_factory):
    folder = tmp_path_factory.mktemp("death")
    cat = mock_catalog(np.random.default_rng(5), 1.0, samples=((0.02, 30, "dynamical"), (1.0, 30, "dynamical")))
    write_csv(cat.subset(cat.sample == "S0"), folder / "local.csv")
    write_csv(cat.subset(cat.sample == "S1"), folder / "high.csv")
    (folder / "run.toml").write_text('[[sample]]\nname = "S0"\npath = "local.csv"\n'
                                     '[[sample]]\nname = "S1"\npath = "high.csv"\n')
    path = folder / "campaign.toml"
    path.write_text('seed = 4\ndesign = "run.toml"\n[grid]\nk = [0.0, 1.0]\nrealisations = 2000\n')
    return path


@pytest.mark.skipif(not Path("/proc/self/environ").exists(), reason="needs Linux /proc")
@pytest.mark.parametrize("moment", ["pool start-up", "fitting"])
def test_workers_die_with_a_killed_parent(campaign, tmp_path, moment):
    tag = uuid.uuid4().hex
    env = {**os.environ, "PYTHONPATH": str(REPO), TAG: tag}
    command = [sys.executable, "-m", "cosmogrow.cli.dispatch", "inject", "--config", str(campaign),
               "--out", str(tmp_path / "out"), "--workers", "2", "--quiet"]
    parent = subprocess.Popen(command, cwd=REPO, env=env, stdout=subprocess.DEVNULL,
                              stderr=subprocess.DEVNULL, start_new_session=True)
    try:
        deadline = time.monotonic() + 120
        workers = []
        while time.monotonic() < deadline and parent.poll() is None and not workers:
            workers = [pid for pid in tagged_processes(tag) if pid != parent.pid]
            time.sleep(0.005)
        assert workers, "no worker process appeared"
        if moment == "fitting":
            journal = tmp_path / "out" / "journal.jsonl"
            while time.monotonic() < deadline and not (journal.exists() and journal.stat().st_size):
                time.sleep(0.02)
            assert journal.exists(), "no mock finished"
        os.kill(parent.pid, signal.SIGKILL)  # the parent only: its workers must follow by themselves
        parent.wait()
        deadline = time.monotonic() + 10
        while tagged_processes(tag) and time.monotonic() < deadline:
            time.sleep(0.1)
        assert tagged_processes(tag) == []
    finally:
        for pid in tagged_processes(tag):  # leave nothing behind if the test fails
            os.kill(pid, signal.SIGKILL)
        if parent.poll() is None:
            parent.kill()
