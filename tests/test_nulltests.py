"""Null tests: nominal false-failure rates on clean mocks, planted problems caught, the CLI.

Calibration: on mocks with no coupling and no systematic, each test fails at most at its level
alpha plus binomial 3 sigma over >= 100 mocks. The consistency tests (subsets, matching, single
method: a few fits per mock) use the run's own fast estimator. The resampling tests (permutation,
split, k = 0 mocks: ~60 fits per mock) use a cheaper estimator with the same call signature, a
closed-form weighted least-squares fit of the same ratio model; the test statistics are the same
code. Levels: alpha = 0.05 and 0.1 give binomial bands that can detect an inflated failure rate.
"""

import json

import numpy as np
import pytest

from cosmogrow import background
from cosmogrow.checks import null_tests as nullcases
from cosmogrow.checks.context import binomial_two_sided_p
from cosmogrow.checks.wording import combined_pulls, pull_row
from cosmogrow.data.catalog import Catalog
from cosmogrow.cli.dispatch import main
from cosmogrow.config import ModelOptions, RunConfig
from cosmogrow.errors import ConfigError
from cosmogrow.inference.fit import FitData
from cosmogrow.selection.compiled import build_selection
from cosmogrow.model.likelihood import lever_arm
from cosmogrow.checks.null_suite import (bonferroni, make_context, monte_carlo_p, nested_pull, predictive_p,
                                 run_null_tests)

from mocks import mock_catalog, write_csv

COSMO = background.get_cosmology(None)
N_MOCKS = 100


class LinearFitter:
    """Weighted least squares of m - s = alpha - k x + delta_method + noise, the scatter estimated
    from the residuals: the ratio model without priors or selection, in closed form."""

    def __call__(self, catalog, *, seed=None, selection_catalog=None):
        x = lever_arm(catalog.z)
        y = np.asarray(catalog.log_mbh) - np.asarray(catalog.log_mstar)
        methods = catalog.method_names
        columns = [np.ones_like(x), -x] + [(catalog.method == m).astype(float) for m in methods[1:]]
        design = np.column_stack(columns)
        err2 = np.asarray(catalog.log_mbh_err) ** 2 + np.asarray(catalog.log_mstar_err) ** 2
        n, p = design.shape
        scatter2 = 0.09
        for _ in range(3):
            w = 1.0 / (scatter2 + err2)
            normal = design.T @ (design * w[:, None])
            coef = np.linalg.solve(normal, design.T @ (w * y))
            resid = y - design @ coef
            scatter2 = max(np.sum(resid**2) / (n - p) - np.mean(err2), 1e-4)
        cov = np.linalg.inv(normal)
        return {"k": float(coef[1]), "k_std": float(np.sqrt(cov[1, 1])), "converged": True}


def data_of(catalog, selections=None):
    """FitData as `fit.load_data` builds it: selections compiled into models per sample."""
    models = {name: list(build_selection(spec)) for name, spec in (selections or {}).items()}
    return FitData(catalog=catalog, files=[], selections=models, cosmology=COSMO)


def fail_ceiling(alpha, n):
    return alpha + 3 * np.sqrt(alpha * (1 - alpha) / n)


# ----- statistics --------------------------------------------------------------------------------
def test_statistics_helpers():
    assert bonferroni([0.02, 0.5, 0.9]) == pytest.approx(0.06)
    assert bonferroni([0.6, 0.9]) == 1.0
    assert monte_carlo_p(3.0, [1, 2, 4, 5]) == pytest.approx(3 / 5)
    assert nested_pull({"k": 1.0, "k_std": 0.5}, {"k": 0.4, "k_std": 0.4}) == pytest.approx(2.0)
    draws = np.random.default_rng(1).normal(0, 1, 400)
    assert predictive_p(0.0, draws) > 0.9
    assert predictive_p(4.0, draws) < 1e-3 < monte_carlo_p(4.0, draws)
    # the predictive p-value is uniform for a new draw of the same Gaussian
    rng = np.random.default_rng(5)
    ps = [predictive_p(rng.normal(), rng.normal(size=20)) for _ in range(5000)]
    assert abs(np.mean(np.array(ps) < 0.1) - 0.1) < 3 * np.sqrt(0.09 / 5000)


def test_binomial_check_is_two_sided():
    # 0 of 100 false exclusions at a nominal 5 %: P(X = 0) = 0.95^100 = 0.0059, the mid-p value
    assert binomial_two_sided_p(0, 100, 0.05) == pytest.approx(0.95**100)
    assert binomial_two_sided_p(0, 100, 0.05) < 0.01          # flagged at the default level
    assert binomial_two_sided_p(15, 100, 0.05) < 0.01         # too many is flagged as before
    assert binomial_two_sided_p(5, 100, 0.05) > 0.5
    # its false-alarm rate under the null stays near the level (binomial 3σ over 20000 draws)
    counts = np.random.default_rng(3).binomial(100, 0.05, 20000)
    table = np.array([binomial_two_sided_p(x, 100, 0.05) for x in range(101)])
    rate = np.mean(table[counts] < 0.01)
    assert rate < 0.01 + 3 * np.sqrt(0.01 * 0.99 / 20000) + 0.002  # mid-p: ~1.07 % at 1 %


def test_a_variance_floor_that_decides_is_named():
    full = {"k": 0.5, "k_std": 0.499}
    # Var(k_sub - k_full) = 0.25 - 0.249 = 0.001 (pull 3.2, fails) floored at 0.05 σ_sub² (pull 0.9)
    row = pull_row({"k": 0.6, "k_std": 0.5}, full, left_out="A")
    p, passed, worst, floor = combined_pulls([row], 0.01)
    assert passed and worst["left_out"] == "A" and row["p_unfloored"] < 0.01
    assert "rests on a variance floor" in floor and "would fail" in floor
    clear = pull_row({"k": 0.6, "k_std": 0.5}, {"k": 0.5, "k_std": 0.3})
    assert combined_pulls([clear], 0.01)[3] == ""


# ----- calibration on clean mocks ----------------------------------------------------------------
def test_consistency_tests_fail_at_their_nominal_rate():
    alpha = 0.05
    fails = {"leave_samples_out": 0, "host_mass_matching": 0, "single_method": 0}
    for r in range(N_MOCKS):
        rng = np.random.default_rng([101, r])
        # the offset of method "rm" is drawn from its prior (width 0.3 dex), as the model assumes
        cat = mock_catalog(rng, 0.0, samples=((0.03, 40, "dyn"), (0.5, 40, "rm"), (1.0, 40, "dyn")),
                           offsets={"rm": rng.normal(0, 0.3)})
        ctx = make_context(RunConfig(), data_of(cat), seed=r, repeats=1, alpha=alpha)
        for name in fails:
            fails[name] += nullcases.TESTS[name](ctx)["passed"] is False
    for name, count in fails.items():
        assert count / N_MOCKS <= fail_ceiling(alpha, N_MOCKS), f"{name}: {count}/{N_MOCKS} failed"


def test_resampling_tests_fail_at_their_nominal_rate():
    alpha, n_mocks = 0.1, 120
    fails = {"redshift_permutation": 0, "reference_split": 0, "k0_false_exclusions": 0}
    fitter = LinearFitter()
    for r in range(n_mocks):
        cat = mock_catalog(np.random.default_rng([102, r]), 0.0,
                           samples=((0.03, 40, "dyn"), (0.5, 40, "dyn"), (1.0, 40, "dyn")))
        ctx = make_context(RunConfig(), data_of(cat), seed=r, repeats=19, alpha=alpha, fitter=fitter)
        for name in fails:
            fails[name] += nullcases.TESTS[name](ctx)["passed"] is False
    for name, count in fails.items():
        assert count / n_mocks <= fail_ceiling(alpha, n_mocks), f"{name}: {count}/{n_mocks} failed"


# ----- planted problems --------------------------------------------------------------------------
def four_samples(offset_high_z):
    """Two methods each spanning a low and a high redshift; the high-z 'se' sample only is offset."""
    cat = mock_catalog(np.random.default_rng(11), 0.0,
                       samples=((0.03, 80, "rm"), (0.6, 80, "rm"), (0.1, 80, "se"), (1.2, 80, "se")))
    return cat.replace(log_mbh=cat.log_mbh + offset_high_z * (cat.sample == "S3"))


def test_single_method_test_flags_an_offset_of_the_high_z_sample_only():
    clean = run_null_tests(RunConfig(), data_of(four_samples(0.0)), seed=1, repeats=1,
                           tests=["single_method"])["tests"]["single_method"]
    planted = run_null_tests(RunConfig(), data_of(four_samples(0.5)), seed=1, repeats=1,
                             tests=["single_method"])
    row = planted["tests"]["single_method"]
    assert clean["passed"] is True
    assert row["passed"] is False and row["p_value"] < 1e-4
    assert "not constant in redshift" in row["note"]
    assert planted["failed"] == ["single_method"] and "consistency test fails" in planted["summary"][-1]


def host_mismatch(beta, n=300):
    rng = np.random.default_rng(5)
    parts = []
    for j, (z_mid, s_mean) in enumerate(((0.03, 11.3), (1.0, 10.7))):
        z = z_mid * (1 + 0.1 * rng.uniform(-1, 1, n))
        s = rng.normal(s_mean, 0.25, n)
        m = 8.5 + beta * (s - 11.0) + rng.normal(0, 0.3, n)
        parts.append(Catalog.from_columns(
            z=z, log_mbh=m + rng.normal(0, 0.1, n), log_mbh_err=np.full(n, 0.1),
            log_mstar=s + rng.normal(0, 0.05, n), log_mstar_err=np.full(n, 0.05), sample=f"S{j}",
            method="dyn", ids=[f"S{j}-{i}" for i in range(n)]))
    return Catalog.concat(parts)


@pytest.mark.parametrize("beta, form, flagged", [(1.0, "ratio", False), (0.5, "ratio", True),
                                                  (0.5, "relation", False)])
def test_host_mass_matching_flags_a_mismatch_fitted_in_the_ratio_form(beta, form, flagged):
    config = RunConfig(model=ModelOptions(form=form))
    row = run_null_tests(config, data_of(host_mismatch(beta)), seed=2, repeats=1,
                         tests=["host_mass_matching"])["tests"]["host_mass_matching"]
    assert row["passed"] is (not flagged)
    if flagged:
        assert row["p_value"] < 1e-3 and "β ≠ 1" in row["note"]


CUT = 8.5


def cut_catalog():
    """k = 0 data whose high-z sample kept only log M_BH > 8.5 (observed)."""
    cat = mock_catalog(np.random.default_rng(3), 0.0, samples=((0.03, 120, "dyn"), (1.0, 400, "dyn")))
    return cat.subset((cat.sample == "S0") | (cat.log_mbh > CUT))


def test_k0_with_selection_needs_a_declared_selection_and_flags_an_incomplete_one():
    cat = cut_catalog()
    undeclared = run_null_tests(RunConfig(), data_of(cat), seed=4, repeats=10,
                                tests=["k0_with_selection"])["tests"]["k0_with_selection"]
    assert undeclared["passed"] is None and undeclared["p_value"] is None
    assert "no selection is declared" in undeclared["skipped"]
    assert undeclared["note"].startswith("Not applicable")
    declared = run_null_tests(RunConfig(), data_of(cat, {"S1": {"kind": "mass_cut", "log_mbh_min": CUT}}),
                              seed=5, repeats=40, tests=["k0_with_selection"])["tests"]["k0_with_selection"]
    assert declared["passed"] is True
    # a cut declared softer than the real one: the declared selection alone does not explain k
    softer = run_null_tests(RunConfig(), data_of(cat, {"S1": {"kind": "mass_cut", "log_mbh_min": 7.5}}),
                            seed=5, repeats=40, tests=["k0_with_selection"])["tests"]["k0_with_selection"]
    assert softer["passed"] is False and softer["p_value"] < 1e-3
    assert "selection is not fully declared" in softer["note"]


class InflatedFitter(LinearFitter):
    """The closed-form fit with its standard deviation of k tripled: intervals far too wide."""

    def __call__(self, catalog, **kwargs):
        out = super().__call__(catalog, **kwargs)
        return {**out, "k_std": 3.0 * out["k_std"]}


def test_false_exclusions_flag_too_few_as_well_as_too_many():
    cat = mock_catalog(np.random.default_rng(12), 0.0, samples=((0.03, 40, "dyn"), (1.0, 40, "dyn")))
    row = run_null_tests(RunConfig(), data_of(cat), seed=3, repeats=100, fitter=InflatedFitter(),
                         tests=["k0_false_exclusions"])["tests"]["k0_false_exclusions"]
    assert row["details"]["false_exclusions"] == 0 and row["details"]["mocks"] == 100
    assert row["passed"] is False and row["p_value"] == pytest.approx(0.95**100)
    assert "too wide" in row["note"]


def test_permutation_keeps_each_objects_selection():
    cat = cut_catalog()
    row = run_null_tests(RunConfig(), data_of(cat, {"S1": {"kind": "mass_cut", "log_mbh_min": CUT}}),
                         seed=5, repeats=20, tests=["redshift_permutation"])["tests"]["redshift_permutation"]
    draws = np.array(row["details"]["k_permuted"])
    assert abs(draws.mean()) < 3 * draws.std(ddof=1) / np.sqrt(draws.size) + 0.05
    assert row["passed"] is True


def test_reference_split_flags_an_assumed_host_growth():
    # with gamma = 1 fixed, only k - gamma is identified: moved objects, which did not grow, look
    # like k = gamma (docs/method.md#model)
    cat = mock_catalog(np.random.default_rng(6), 0.0, samples=((0.03, 100, "d"), (1.0, 100, "d")))
    plain = run_null_tests(RunConfig(), data_of(cat), seed=6, repeats=20, tests=["reference_split"])
    grown = run_null_tests(RunConfig(model=ModelOptions(host_growth=1.0)), data_of(cat), seed=6,
                           repeats=20, tests=["reference_split"])
    assert plain["tests"]["reference_split"]["passed"] is True
    row = grown["tests"]["reference_split"]
    assert row["passed"] is False and abs(row["details"]["mean_k"] - 1.0) < 0.3


def test_tests_that_cannot_run_say_why():
    one = mock_catalog(np.random.default_rng(7), 0.0, samples=((0.5, 30, "d"),))
    result = run_null_tests(RunConfig(), data_of(one), seed=1, repeats=3,
                            tests=["reference_split", "leave_samples_out", "host_mass_matching",
                                   "single_method", "leave_sources_out", "k0_with_selection"])
    reasons = {name: row["skipped"] for name, row in result["tests"].items()}
    assert "no source column" in reasons["leave_sources_out"]
    assert "no selection is declared" in reasons["k0_with_selection"]
    assert "only one sample" in reasons["reference_split"]
    assert "fewer than three" in reasons["leave_samples_out"]
    assert "only one sample" in reasons["host_mass_matching"]
    assert "same mass method" in reasons["single_method"]
    assert all(row["passed"] is None for row in result["tests"].values())
    assert result["failed"] == [] and set(result["not_applicable"]) == set(reasons)
    assert "Not applicable here" in result["summary"][-1]


def test_permutation_cannot_fail_when_every_block_sits_at_one_redshift():
    cat = mock_catalog(np.random.default_rng(7), 0.0, samples=((0.03, 30, "dyn"), (1.2, 30, "virial")),
                       z_spread=0.0)
    row = run_null_tests(RunConfig(), data_of(cat), seed=1, repeats=3,
                         tests=["redshift_permutation"])["tests"]["redshift_permutation"]
    assert row["passed"] is None and "single redshift" in row["skipped"]


@pytest.mark.parametrize("kwargs, message", [
    ({"repeats": 0}, "--repeats: expected an integer >= 1"),
    ({"alpha": 0.7}, "--alpha: expected 0 < alpha < 0.5"),
    ({"mode": "slow"}, "--mode: expected one of fast, mcmc"),
    ({"tests": ["bootstrap"]}, "null test 'bootstrap' unknown"),
])
def test_bad_settings_are_config_errors(kwargs, message):
    cat = mock_catalog(np.random.default_rng(8), 0.0, samples=((0.02, 20, "d"), (1.0, 20, "d")))
    with pytest.raises(ConfigError, match=message):
        run_null_tests(RunConfig(), data_of(cat), **kwargs)


# ----- command line ------------------------------------------------------------------------------
def write_run(folder, catalog, extra=""):
    for name in catalog.sample_names:
        write_csv(catalog.subset(catalog.sample == name), folder / f"{name}.csv")
    text = "seed = 3\n" + extra + "".join(f'[[sample]]\nname = "{n}"\npath = "{n}.csv"\n'
                                          for n in catalog.sample_names)
    (folder / "run.toml").write_text(text)
    return folder / "run.toml"


def test_cli_writes_results_and_is_reproducible(tmp_path, capsys):
    cat = mock_catalog(np.random.default_rng(9), 0.0,
                       samples=((0.03, 40, "dyn"), (0.5, 40, "rm"), (1.0, 40, "dyn")))
    config = write_run(tmp_path, cat)
    runs = []
    for name in ("a", "b"):
        out = tmp_path / name
        assert main(["nulltest", "--config", str(config), "--out", str(out), "--repeats", "5",
                     "--quiet"]) == 0
        for file in ("nulltests.json", "nulltests.png", "summary.md"):
            assert (out / file).is_file(), file
        runs.append(json.loads((out / "nulltests.json").read_text()))
    assert runs[0]["tests"] == runs[1]["tests"]
    assert set(runs[0]["tests"]) == set(nullcases.TESTS)
    for row in runs[0]["tests"].values():
        assert {"null_hypothesis", "statistic", "value", "p_value", "threshold", "passed", "note"} <= set(row)
    assert "In plain words" in capsys.readouterr().out


@pytest.mark.parametrize("extra, args, message", [
    ("[model]\nform = \"curved\"\n", [], "model.form: expected one of ratio, relation"),
    ("", ["--repeats", "0"], "--repeats: expected a finite number > 0"),
])
def test_cli_bad_input_exits_2_with_one_line_and_writes_nothing(tmp_path, capsys, extra, args, message):
    cat = mock_catalog(np.random.default_rng(10), 0.0, samples=((0.03, 20, "d"), (1.0, 20, "d")))
    config = write_run(tmp_path, cat, extra)
    out = tmp_path / "out"
    assert main(["nulltest", "--config", str(config), "--out", str(out), "--quiet", *args]) == 2
    err = capsys.readouterr().err.strip()
    assert message in err and len(err.splitlines()) == 1
    assert not out.exists()
