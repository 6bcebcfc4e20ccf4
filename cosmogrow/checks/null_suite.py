"""Null tests of a k measurement (docs/method.md#null-tests): would the method find a signal where there is none,
does every subset agree, could the declared selection alone have produced the estimate?

Each test (in `cosmogrow.checks.null_tests`) states its null hypothesis, its statistic, its threshold and
whether it passes. Every fit is made "as the data": the run's model, priors and (declared)
selection, fast (MAP + Laplace) or by MCMC. The shared machinery (fitter, context, statistics)
is in `cosmogrow.checks.context`; this module runs the tests and words their summary.
"""

from ..errors import ConfigError
from .null_tests import TESTS
from .context import (  # noqa: F401  (re-exported API)
    ALPHA, DEFAULT_REPEATS, INTERVAL_LEVEL, MIN_DIFFERENCE_VARIANCE, Fitter, NullContext,
    binomial_excess_p, bonferroni, fit_model, make_context, make_result, monte_carlo_p,
    nested_pull, predictive_p, skipped_result, truth_at, two_sided_mc_p, two_sided_p)


def run_null_tests(config, data, *, mode="fast", seed=0, repeats=DEFAULT_REPEATS, alpha=ALPHA,
                   fitter=None, tests=None, on_test=None):
    """Every null test on the data.

    Parameters
    ----------
    config : RunConfig; data : FitData
    mode : "fast" or "mcmc"; seed : int; repeats : int (permutations, splits, k = 0 mocks)
    alpha : float, significance level of each test
    fitter : optional replacement of `Fitter(config, data, mode=mode)` (same call signature)
    tests : iterable of test names (default: all, see `nullcases.TESTS`)
    on_test : callable(name), optional progress hook called before each test

    Returns
    -------
    dict: observed fit, settings, tests (name -> result), failed (names), summary (plain words)
    """

    names = list(TESTS) if tests is None else list(tests)
    unknown = sorted(set(names) - set(TESTS))
    if unknown:
        raise ConfigError(f"null test {unknown[0]!r} unknown; expected some of {', '.join(TESTS)}")
    context = make_context(config, data, mode=mode, seed=seed, repeats=repeats, alpha=alpha,
                           fitter=fitter)
    results = {}
    for name in names:
        if on_test is not None:
            on_test(name)
        results[name] = TESTS[name](context)
    failed = [name for name, row in results.items() if row["passed"] is False]
    return {"observed": context.observed, "mode": mode, "seed": int(seed), "repeats": int(repeats),
            "alpha": float(alpha),
            "selection_modelled": bool(any(data.selections.values())),
            "tests": results, "failed": failed, "summary": suite_summary(results, alpha)}


def suite_summary(results, alpha):
    """Plain words: which tests fail and what that suggests."""
    failed = [row for row in results.values() if row["passed"] is False]
    skipped = [row for row in results.values() if row["passed"] is None]
    ran = len(results) - len(skipped)
    if not failed:
        head = (f"All {ran} null tests that could run pass at the {alpha:g} level: no sign that the "
                "method finds a signal where there is none, that subsets disagree, or that the "
                "declared selection alone explains the estimate.")
        return [head]
    lines = [f"{len(failed)} of {ran} null tests fail at the {alpha:g} level: "
             + ", ".join(row["title"] for row in failed) + "."]
    lines += [f"{row['title']}: {row['note']}" for row in failed]
    signal_only = {row["name"] for row in failed} <= {"redshift_permutation", "k0_with_selection"}
    if signal_only:
        lines.append("Only the tests whose null hypothesis includes k = 0 fail, while the consistency "
                     "tests pass: the data carry a redshift trend that neither chance nor the declared "
                     "selection produces. That is what a coupling would look like, but an undeclared "
                     "selection or a redshift-dependent calibration would look the same; check the "
                     "selection of every sample (`cosmogrow challenge`).")
    else:
        lines.append("A consistency test fails: the estimate of k depends on choices it should not "
                     "depend on. Treat k as unreliable until the failing test is understood.")
        if {row["name"] for row in failed} & {"redshift_permutation", "k0_with_selection"}:
            lines.append("The redshift trend that the permutation or k = 0 test detects may then be "
                         "produced by the same problem rather than by a coupling.")
    return lines
