"""Null tests of a k measurement (docs/method.md#null-tests): would the method find a signal where there is none,
does every subset agree, could the declared selection alone have produced the estimate?

Each test (in `cosmogrow.checks.null_tests`) states its null hypothesis, its statistic, its threshold and
whether it passes. Every fit is made "as the data": the run's model, priors and (declared)
selection, fast (MAP + Laplace) or by MCMC. The shared machinery (fitter, context, statistics)
is in `cosmogrow.checks.context`; this module runs the tests and words their summary.
"""

from ..errors import ConfigError
from .null_tests import CALIBRATION_TESTS, SIGNAL_TESTS, TESTS
from .context import (  # noqa: F401  (re-exported API)
    ALPHA, DEFAULT_REPEATS, INTERVAL_LEVEL, MIN_DIFFERENCE_VARIANCE, Fitter, NullContext,
    binomial_two_sided_p, bonferroni, confounded_labels, fit_model, make_context, make_result,
    monte_carlo_p, nested_pull, predictive_p, redshift_confounding, skipped_result, truth_at,
    two_sided_mc_p, two_sided_p)


def run_null_tests(config, data, *, mode="fast", seed=0, repeats=DEFAULT_REPEATS, alpha=ALPHA,
                   fitter=None, tests=None, on_test=None):
    """Every null test on the data.

    Parameters
    ----------
    config : RunConfig; data : FitData
    mode : "fast" or "mcmc"; seed : int; repeats : int (permutations, splits, k = 0 mocks)
    alpha : float, significance level of each test
    fitter : optional replacement of `Fitter(config, data, mode=mode)` (same call signature)
    tests : iterable of test names (default: all, see `null_tests.TESTS`)
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
            "tests": results, "failed": failed,
            "not_applicable": [name for name, row in results.items() if row["passed"] is None],
            "confounding": redshift_confounding(data.catalog),
            "summary": suite_summary(results, alpha, data.catalog)}


def suite_summary(results, alpha, catalog=None):
    """Plain words: which tests fail and what that suggests.

    A failure of the tests whose null includes k = 0 is called "what a coupling would look like"
    only when no mass method or host type is confounded with redshift (`confounded_labels`) and
    the methods are declared; otherwise the words name the confounding that could explain it.
    """
    failed = [row for row in results.values() if row["passed"] is False]
    not_applicable = [row for row in results.values() if row["passed"] is None]
    ran = len(results) - len(not_applicable)
    lines = []
    if not failed:
        lines.append(f"All {ran} null tests that could run pass at the {alpha:g} level: no sign that "
                     "the method finds a signal where there is none, that subsets disagree, or that "
                     "the estimator is miscalibrated on this design.")
    else:
        lines.append(f"{len(failed)} of {ran} null tests fail at the {alpha:g} level: "
                     + ", ".join(f"{row['title']} (p = {row['p_value']:.3g})" for row in failed) + ".")
        lines += [f"{row['title']}: {row['note']}" for row in failed]
        lines += _failure_words({row["name"] for row in failed}, catalog)
    if not_applicable:
        lines.append("Not applicable here: " + "; ".join(f"{row['title']} ({row['skipped']})"
                                                        for row in not_applicable) + ".")
    return lines


def _failure_words(names, catalog):
    signal, calibration = names & set(SIGNAL_TESTS), names & set(CALIBRATION_TESTS)
    consistency = names - signal - calibration
    lines = []
    if calibration:
        lines.append("The estimator's intervals are not calibrated on this design: read every "
                     "significance with that in mind (run `cosmogrow inject` on this design).")
    if consistency:
        lines.append("A consistency test fails: the estimate of k depends on choices it should not "
                     "depend on. Treat k as unreliable until the failing test is understood.")
        if signal:
            lines.append("The redshift trend that the permutation or k = 0 test detects may then be "
                         "produced by the same problem rather than by a coupling.")
        return lines
    if not signal:
        return lines
    confounded = confounded_labels(catalog) if catalog is not None else []
    undeclared = (catalog is not None and catalog.method_names == ("unspecified",)
                  and len(catalog.sample_names) > 1)
    if confounded:
        words = " and ".join("mass method" if name == "method" else "host type" for name in confounded)
        lines.append(f"Only tests whose null hypothesis includes k = 0 fail, but {words} go with "
                     "redshift in these data: an offset between the groups (a calibration or a "
                     "host-type difference) would produce the same result, so this is not evidence "
                     "of a coupling by itself.")
    elif undeclared:
        lines.append("Only tests whose null hypothesis includes k = 0 fail, but no mass method is "
                     "declared: any calibration or host-type difference between the samples is "
                     "absorbed into k, so this is not evidence of a coupling by itself.")
    else:
        lines.append("Only the tests whose null hypothesis includes k = 0 fail, while the consistency "
                     "tests pass: the data carry a redshift trend that neither chance nor the declared "
                     "selection produces. That is what a coupling would look like, but an undeclared "
                     "selection or a redshift-dependent calibration would look the same; check the "
                     "selection of every sample (`cosmogrow challenge`).")
    return lines
