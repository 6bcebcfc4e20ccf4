"""Work done beside the main process (inference.forked) gives the results of the serial run.

- `Beside` returns the child's value and its seconds; without fork (or when disabled) the call runs
  in the parent; when the child fails or is killed, the parent computes the value itself, so an
  error surfaces where it would have serially;
- the sensitivity rows split over two processes equal the serial rows exactly;
- `Halves` (half of every sampler call in a child) returns the values of two separate calls, with
  or without the child; a child whose call fails, or that is killed, is replaced by the parent;
- `run_fit(parallel=True)` (the command line's setting) gives the serial fit's summary: the
  cross-check computed beside the sampling, half of the walkers evaluated in a child, the rows,
  verdicts and k identical.
"""

import os
import signal
import time

import numpy as np
import pytest

import cosmogrow
from cosmogrow.inference import fit, k_estimate, sensitivity
from cosmogrow.inference.fit import load_data, run_fit
from cosmogrow.inference.forked import Beside, Halves, can_fork
from cosmogrow.inference.laplace import laplace
from cosmogrow.outputs import to_jsonable

from mocks import mock_catalog, write_samples
from test_significance import CONFOUNDED, make_model

needs_fork = pytest.mark.skipif(not can_fork(), reason="needs fork and two cores")


def _square_and_pid(x):
    return x * x, os.getpid()


def _fails(x):
    raise ValueError(f"bad value {x}")


def _pid_slowly_in_a_child(parent):
    """This process's pid; a forked child waits 30 s first (so the test can kill it first)."""
    if os.getpid() != parent:
        time.sleep(30)
    return os.getpid()


@needs_fork
def test_beside_runs_in_a_child_and_returns_its_value():
    pending = Beside(_square_and_pid, 7)
    assert pending.forked
    (value, pid), seconds = pending.result()
    assert value == 49 and pid != os.getpid() and seconds >= 0


def test_disabled_runs_in_the_parent():
    pending = Beside(_square_and_pid, 3, enabled=False)
    assert not pending.forked
    (value, pid), _ = pending.result()
    assert value == 9 and pid == os.getpid()


@needs_fork
def test_an_error_in_the_child_surfaces_in_the_parent():
    pending = Beside(_fails, 2)
    with pytest.raises(ValueError, match="bad value 2"):
        pending.result()


@needs_fork
def test_a_killed_child_is_replaced_by_the_parent():
    pending = Beside(_pid_slowly_in_a_child, os.getpid())
    assert pending.forked
    os.kill(pending._pid, signal.SIGKILL)
    start = time.perf_counter()
    value, _ = pending.result()
    assert value == os.getpid()  # computed here, at once
    assert time.perf_counter() - start < 10


@needs_fork
def test_sensitivity_rows_split_over_two_processes_equal_the_serial_rows(monkeypatch):
    rng = np.random.default_rng(11)
    catalog = mock_catalog(rng, 0.0, samples=CONFOUNDED, offsets={"virial": 0.45}, z_spread=0.03)
    model = make_model(catalog)
    approx = laplace(model)
    k_draws = rng.multivariate_normal(approx.theta, approx.covariance, 1500)[:, 0]
    serial = sensitivity.sensitivity_rows(model, approx, k_draws, [0.0, 3.0], n_draws=400, seed=5)
    monkeypatch.setattr(sensitivity, "BESIDE_MIN_OBJECTS", 0)
    split = sensitivity.sensitivity_rows(model, approx, k_draws, [0.0, 3.0], n_draws=400, seed=5,
                                         parallel=True)
    assert len(serial) == len(split) >= 6
    assert split == serial


class _Recorder:
    """A vectorised function whose value of a row depends on the whole call (its first row and its
    size), so that a call split differently would show; optionally failing in a forked child."""

    def __init__(self, fail_in_child=False):
        self.parent, self.fail_in_child = os.getpid(), fail_in_child

    def __call__(self, theta):
        if self.fail_in_child and os.getpid() != self.parent:
            raise ValueError("fails in the child")
        return theta[:, 0] * 10.0 + theta[0, 1] + len(theta)


@pytest.mark.parametrize("rows", [1, 2, 5, 16])
def test_halves_equal_two_separate_calls(rows):
    theta = np.random.default_rng(rows).normal(size=(rows, 3))
    function = _Recorder()
    cut = (rows + 1) // 2
    expected = np.concatenate([function(theta[:cut])] + ([function(theta[cut:])] if rows > cut else []))
    with Halves(function, 3, enabled=False) as here:
        assert not here.forked
        assert np.array_equal(here(theta), expected)
    if can_fork():
        with Halves(function, 3) as beside:
            assert beside.forked
            for _ in range(3):  # the child serves call after call
                assert np.array_equal(beside(theta), expected)
            assert beside.forked


@needs_fork
def test_halves_child_that_fails_or_dies_is_replaced_by_the_parent():
    theta = np.arange(12.0).reshape(4, 3)
    expected = Halves(_Recorder(), 3, enabled=False)(theta)
    failing = Halves(_Recorder(fail_in_child=True), 3)
    assert failing.forked
    assert np.array_equal(failing(theta), expected)  # computed here after the child's failure
    assert not failing.forked
    killed = Halves(_Recorder(), 3)
    os.kill(killed._pid, signal.SIGKILL)
    start = time.perf_counter()
    assert np.array_equal(killed(theta), expected)
    assert not killed.forked and time.perf_counter() - start < 10


@needs_fork
def test_parallel_fit_gives_the_serial_summary(tmp_path, monkeypatch):
    rng = np.random.default_rng(3)
    catalog = mock_catalog(rng, 1.0, samples=((0.02, 150, "dynamical"), (1.2, 150, "virial")))
    near, far = write_samples(catalog, tmp_path, ("near.csv", "far.csv"))
    config = cosmogrow.run_config([{"name": "near", "data": near}, {"name": "far", "data": far}], seed=4)
    data = load_data(config)
    monkeypatch.setattr(sensitivity, "BESIDE_MIN_OBJECTS", 0)
    monkeypatch.setattr(fit, "BESIDE_MIN_OBJECTS", 0)
    monkeypatch.setattr(k_estimate, "HALVES_MIN_OBJECTS", 0)
    serial = run_fit(config, data).summary
    parallel = run_fit(config, data, parallel=True).summary
    for key in ("k", "crosscheck", "sensitivity", "verdicts", "tests", "parameters"):
        assert to_jsonable(parallel[key]) == to_jsonable(serial[key]), key
