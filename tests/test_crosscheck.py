"""The distribution-matching cross-check: recovery, the disagreement warning, edge cases, the fit hook.

The cross-check inverts two-sample tests, so its range "p >= 0.05" is a 95 % confidence set of k
when the shifted samples share one distribution (common practice: test inversion); over 100 seeded
Gaussian mocks the truth must lie in each test's range at least at 95 % minus binomial 3 sigma.
"""

import json

import numpy as np
import pytest
from scipy import stats

from cosmogrow.data.catalog import Catalog
from cosmogrow.cli.dispatch import main
from cosmogrow.config import RunConfig, parse_run_config
from cosmogrow.inference.crosscheck import (CrosscheckOptions, crosscheck_options, crosscheck_warnings,
                                  distribution_crosscheck, run_crosscheck)
from cosmogrow.errors import ConfigError
from cosmogrow.inference.fit import FitData
from cosmogrow.model.likelihood import lever_arm
from cosmogrow.checks.null_suite import Fitter

from mocks import mock_catalog, write_csv

N_MOCKS = 100
GRID = CrosscheckOptions(k_min=0.8, k_max=3.2, k_step=0.1)


def skewed_catalog(rng, k, n=300, shape=5.0, scale=0.5):
    """Two samples whose scatter is skewed in opposite senses (scipy.stats.skewnorm), each with its
    median on the relation: the means differ by ~0.11 dex, the distributions are not shifts."""
    parts = []
    for j, (z_mid, a) in enumerate(((0.03, shape), (1.0, -shape))):
        z = z_mid * (1 + 0.1 * rng.uniform(-1, 1, n))
        s = rng.normal(11.0, 0.3, n)
        scatter = stats.skewnorm(a, scale=scale)
        eps = scatter.rvs(size=n, random_state=rng) - scatter.median()
        m = 8.5 + (s - 11.0) + eps - k * lever_arm(z)
        parts.append(Catalog.from_columns(
            z=z, log_mbh=m + rng.normal(0, 0.05, n), log_mbh_err=np.full(n, 0.05),
            log_mstar=s + rng.normal(0, 0.05, n), log_mstar_err=np.full(n, 0.05), sample=f"S{j}",
            method="dynamical", ids=[f"S{j}-{i}" for i in range(n)]))
    return Catalog.concat(parts)


def laplace_summary(catalog):
    """The fast estimator's k as a posterior summary (median, 95 % interval)."""
    fit = Fitter(RunConfig(), FitData(catalog=catalog, files=[], selections={}, cosmology=None))(catalog)
    half = 1.96 * fit["k_std"]
    return {"median": fit["k"], "interval95": [fit["k"] - half, fit["k"] + half]}, fit


def test_recovers_k_within_its_range_on_gaussian_mocks():
    k_true = 2.0
    covered = {"ks": 0, "anderson_darling": 0, "epps_singleton": 0}
    best = []
    for r in range(N_MOCKS):
        cat = mock_catalog(np.random.default_rng([31, r]), k_true,
                           samples=((0.03, 50, "dynamical"), (1.0, 50, "dynamical")))
        result = distribution_crosscheck(cat, GRID)
        for test, row in result["tests"].items():
            rng = row["range"]
            covered[test] += rng is not None and rng[0] - 1e-9 <= k_true <= rng[1] + 1e-9
        best.append(result["tests"]["epps_singleton"]["best_k"])
    floor = 0.95 - 3 * np.sqrt(0.95 * 0.05 / N_MOCKS)
    for test, hits in covered.items():
        assert hits / N_MOCKS >= floor, f"{test}: truth in range for {hits}/{N_MOCKS}"
    best = np.array(best)
    assert abs(best.mean() - k_true) < 3 * best.std(ddof=1) / np.sqrt(N_MOCKS) + 0.05  # grid step / 2


def test_warning_fires_when_skewed_scatter_biases_the_gaussian_posterior():
    k_true = 2.0
    cat = skewed_catalog(np.random.default_rng(3), k_true)
    k_summary, fit = laplace_summary(cat)
    # the Gaussian estimate is biased by the different skewness: more than 3 sigma from the truth
    assert (fit["k"] - k_true) / fit["k_std"] > 3
    result = distribution_crosscheck(cat, CrosscheckOptions(k_step=0.1))
    assert abs(result["tests"]["ks"]["best_k"] - k_true) < abs(fit["k"] - k_true)
    warnings = crosscheck_warnings(result, k_summary)
    assert warnings and "disagrees with the posterior" in warnings[0]


def test_no_warning_on_a_gaussian_mock_of_the_same_design():
    cat = mock_catalog(np.random.default_rng(4), 2.0, samples=((0.03, 300, "d"), (1.0, 300, "d")))
    k_summary, _ = laplace_summary(cat)
    assert crosscheck_warnings(distribution_crosscheck(cat, CrosscheckOptions(k_step=0.1)), k_summary) == []


def test_residual_statistic_removes_a_host_mass_mismatch():
    # beta = 0.5 and hosts 0.6 dex apart: the ratio statistic is biased, the residual is not
    rng = np.random.default_rng(8)
    parts = []
    for j, (z_mid, s_mean) in enumerate(((0.03, 11.3), (1.0, 10.7))):
        n = 300
        z = z_mid * (1 + 0.1 * rng.uniform(-1, 1, n))
        s = rng.normal(s_mean, 0.25, n)
        m = 8.5 + 0.5 * (s - 11.0) + rng.normal(0, 0.3, n) - 1.0 * lever_arm(z)
        parts.append(Catalog.from_columns(z=z, log_mbh=m, log_mbh_err=np.full(n, 0.05), log_mstar=s,
                                          log_mstar_err=np.full(n, 0.01), sample=f"S{j}", method="d"))
    cat = Catalog.concat(parts)
    ratio = distribution_crosscheck(cat, CrosscheckOptions(k_min=-3, k_max=4, k_step=0.1))
    residual = distribution_crosscheck(cat, CrosscheckOptions(k_min=-3, k_max=4, k_step=0.1,
                                                              statistic="residual"))
    lo, hi = residual["tests"]["ks"]["range"]
    assert lo <= 1.0 <= hi
    assert ratio["tests"]["ks"]["range"][1] < 1.0


def test_per_sample_and_pooled_results_and_reference_choice():
    cat = mock_catalog(np.random.default_rng(5), 1.0,
                       samples=((0.5, 40, "d"), (0.02, 40, "d"), (1.2, 40, "d")))
    result = distribution_crosscheck(cat, GRID)
    assert result["reference"] == "S1"  # lowest median redshift
    assert set(result["per_sample"]) == {"S0", "S2"}
    assert len(result["grid"]["k"]) == 25 and len(result["grid"]["p"]["ks"]) == 25
    chosen = distribution_crosscheck(cat, CrosscheckOptions(reference="S0", k_step=0.5))
    assert chosen["reference"] == "S0" and set(chosen["per_sample"]) == {"S1", "S2"}


def test_single_sample_is_skipped_with_a_reason():
    cat = mock_catalog(np.random.default_rng(6), 0.0, samples=((0.5, 30, "d"),))
    result = distribution_crosscheck(cat)
    assert "only one sample" in result["skipped"] and result["tests"] == {}
    assert crosscheck_warnings(result, {"median": 0, "interval95": [-1, 1]}) == []


def test_tiny_sample_skips_epps_singleton_only():
    cat = mock_catalog(np.random.default_rng(7), 0.0, samples=((0.02, 40, "d"), (1.0, 6, "d")))
    result = distribution_crosscheck(cat, CrosscheckOptions(k_step=0.25))
    assert "fewer than 8 objects" in result["tests"]["epps_singleton"]["skipped"]
    assert result["tests"]["epps_singleton"]["best_k"] is None
    assert result["tests"]["ks"]["best_k"] is not None


@pytest.mark.parametrize("table, message", [
    ({"k_sep": 0.1}, "unknown key 'crosscheck.k_sep'"),
    ({"statistic": "mean"}, "crosscheck.statistic: expected one of ratio, residual"),
    ({"k_min": 3.0, "k_max": 1.0}, "expected k_min < k_max"),
    ({"k_step": 0.0}, "crosscheck.k_step: expected > 0"),
    ({"k_step": "fine"}, "crosscheck.k_step: expected a number"),
    ({"k_step": 1e-6}, "the grid has .* points"),
    ({"reference": 3}, "crosscheck.reference: expected a sample name"),
])
def test_bad_crosscheck_tables_are_config_errors(table, message):
    with pytest.raises(ConfigError, match=message):
        crosscheck_options(table)


def test_unknown_reference_names_the_samples():
    cat = mock_catalog(np.random.default_rng(9), 0.0, samples=((0.02, 20, "d"), (1.0, 20, "d")))
    config = parse_run_config({"crosscheck": {"reference": "local"}})
    with pytest.raises(ConfigError, match="'local' is not a sample of the data; expected one of S0, S1"):
        run_crosscheck(config, cat)


def test_fit_command_reports_the_crosscheck_and_its_warning(tmp_path):
    cat = skewed_catalog(np.random.default_rng(3), 2.0, n=250)
    paths = [write_csv(cat.subset(cat.sample == n), tmp_path / f"{n}.csv") for n in cat.sample_names]
    config = tmp_path / "run.toml"
    config.write_text("seed = 1\n[crosscheck]\nk_step = 0.1\n[sampler]\nmax_steps = 3000\n"
                      + "".join(f'[[sample]]\nname = "{p.stem}"\npath = "{p.name}"\n' for p in paths))
    out = tmp_path / "fit"
    assert main(["fit", "--config", str(config), "--out", str(out), "--quiet"]) in (0, 3)
    assert (out / "crosscheck.png").is_file()
    summary = json.loads((out / "summary.json").read_text())
    cross = summary["crosscheck"]
    assert cross["reference"] == "S0" and set(cross["tests"]) == {"ks", "anderson_darling", "epps_singleton"}
    assert any("cross-check" in w for w in summary["warnings"])
    assert "Distribution-matching cross-check" in (out / "summary.md").read_text()
