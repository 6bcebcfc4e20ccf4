"""Null tests on designs where mass method or host type goes with redshift, and on compilations.

- The redshift permutation keeps each object's method and host type: on seeded designs with no
  coupling (truth k = 0) and a +0.45 dex offset between a local and a distant group, it fails at its
  nominal rate (binomial 3σ over 120 mocks, the run's own fast estimator).
- A test that cannot fail says so (passed = None); the summary does not call a confounded result
  "what a coupling would look like".
- Leave one source out catches a 0.27 dex offset between two sources inside one sample.
"""

import numpy as np
import pytest

from cosmogrow import background
from cosmogrow.checks import null_tests as nullcases
from cosmogrow.checks.context import confounded_labels, make_context, redshift_confounding
from cosmogrow.checks.null_suite import run_null_tests, suite_summary
from cosmogrow.config import RunConfig
from cosmogrow.inference.fit import FitData

from mocks import mock_catalog

COSMO = background.get_cosmology(None)
OFFSET = 0.45  # dex, the distant group's calibration (or host-type) offset; no coupling


def data_of(catalog):
    return FitData(catalog=catalog, files=[], selections={}, cosmology=COSMO)


def confounded(rng, label="method", n=40, offset=OFFSET, k=0.0):
    """Local group at z ~ 0.03, distant group at z ~ 1.5 (±10 %), the distant one offset by `offset`
    dex and labelled apart by mass method ("dyn" / "virial") or by host type ("quiescent" / "agn")."""
    cat = mock_catalog(rng, k, samples=((0.03, n, "dyn"), (1.5, n, "virial")),
                       offsets={"virial": offset})
    if label == "host_type":
        return cat.replace(method=np.full(len(cat), "dyn"),
                           host_type=np.where(cat.sample == "S1", "agn", "quiescent"))
    return cat


@pytest.mark.slow
def test_permutation_holds_its_rate_on_confounded_designs_without_coupling():
    alpha, n_mocks, fails = 0.1, 120, 0
    for r in range(n_mocks):
        rng = np.random.default_rng([201, r])
        cat = confounded(rng, "method" if r % 2 else "host_type")
        ctx = make_context(RunConfig(), data_of(cat), seed=r, repeats=19, alpha=alpha)
        fails += nullcases.TESTS["redshift_permutation"](ctx)["passed"] is False
    band = 3 * np.sqrt(alpha * (1 - alpha) / n_mocks)
    assert alpha - band <= fails / n_mocks <= alpha + band, f"{fails}/{n_mocks} failed"


def test_permutation_catches_a_coupling_inside_the_blocks():
    # one method, samples spread widely in redshift: a true k = 3 is a trend inside the block
    cat = mock_catalog(np.random.default_rng(21), 3.0, samples=((0.3, 60, "dyn"), (1.5, 60, "dyn")),
                       z_spread=0.8)
    row = run_null_tests(RunConfig(), data_of(cat), seed=2, repeats=19,
                         tests=["redshift_permutation"])["tests"]["redshift_permutation"]
    assert row["passed"] is False and row["p_value"] < 1e-3


def test_confounding_is_measured_by_label():
    rng = np.random.default_rng(5)
    method = redshift_confounding(confounded(rng, "method"))
    host = redshift_confounding(confounded(rng, "host_type"))
    assert method["method"] > 0.9 and "host_type" not in method
    assert host["host_type"] > 0.9 and "method" not in host
    mixed = mock_catalog(rng, 0.0, samples=((0.03, 40, "dyn"), (0.5, 40, "rm"), (1.0, 40, "dyn")))
    assert confounded_labels(mixed) == []


def _failed(name):
    return {name: {"name": name, "title": name, "passed": False, "p_value": 1e-4, "note": "x",
                   "skipped": None}}


def test_summary_names_confounding_instead_of_a_coupling():
    rng = np.random.default_rng(6)
    for label in ("method", "host_type"):
        lines = " ".join(suite_summary(_failed("k0_with_selection"), 0.01, confounded(rng, label)))
        assert "coupling would look like" not in lines
        assert "not evidence of a coupling by itself" in lines
    undeclared = mock_catalog(rng, 0.0, samples=((0.03, 40, "unspecified"), (1.0, 40, "unspecified")))
    lines = " ".join(suite_summary(_failed("redshift_permutation"), 0.01, undeclared))
    assert "no mass method is declared" in lines and "coupling would look like" not in lines
    clean = mock_catalog(rng, 0.0, samples=((0.03, 40, "dyn"), (1.0, 40, "dyn")))
    assert "That is what a coupling would look like" in " ".join(
        suite_summary(_failed("redshift_permutation"), 0.01, clean))


def compilation(offset, rng):
    """A local sample from one source; a distant sample compiled from two sources, the second
    offset by `offset` dex."""
    cat = mock_catalog(rng, 0.0, samples=((0.03, 80, "dyn"), (1.0, 160, "dyn")))
    distant = np.flatnonzero(cat.sample == "S1")
    source = np.full(len(cat), "local-survey", dtype=object)
    source[distant[:80]], source[distant[80:]] = "compilation-A", "compilation-B"
    shifted = cat.log_mbh + offset * (source == "compilation-B")
    return cat.replace(log_mbh=shifted, source=source)


def test_leave_one_source_out_catches_an_offset_inside_one_sample():
    planted = run_null_tests(RunConfig(), data_of(compilation(0.27, np.random.default_rng(8))),
                             seed=3, repeats=1, tests=["leave_sources_out"])
    row = planted["tests"]["leave_sources_out"]
    assert row["passed"] is False and row["p_value"] < 1e-3
    assert row["details"]["sources"][0]["left_out"] == "local-survey"
    assert max(row["details"]["sources"], key=lambda r: abs(r["pull"]))["left_out"].startswith("compilation")
    assert "is inconsistent with the rest" in row["note"]
    assert planted["failed"] == ["leave_sources_out"]
    clean = run_null_tests(RunConfig(), data_of(compilation(0.0, np.random.default_rng(8))), seed=3,
                           repeats=1, tests=["leave_sources_out"])["tests"]["leave_sources_out"]
    assert clean["passed"] is True


def test_leave_one_source_out_needs_two_sources():
    cat = compilation(0.0, np.random.default_rng(9))
    single = cat.replace(source=np.full(len(cat), "one-survey"))
    row = run_null_tests(RunConfig(), data_of(single), seed=3, repeats=1,
                         tests=["leave_sources_out"])["tests"]["leave_sources_out"]
    assert row["passed"] is None and "one source ('one-survey')" in row["skipped"]
