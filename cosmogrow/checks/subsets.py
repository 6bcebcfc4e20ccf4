"""Null tests on subsets of the data (docs/method.md#null-tests): leave samples out, leave one source
out, host-mass matching, single method. Each fits a subset like the data and compares its k with the
full k by a nested pull (`context.nested_pull`), Bonferroni-combined over subsets.

Seeds: subset i of test t is fitted with ``child_seed(seed, t, i, 1)``.
"""

from itertools import combinations

import numpy as np

from .context import make_result, skipped_result
from .wording import combined_pulls, floor_words, pass_words, pull_row, threshold_text
from ..seeding import child_seed, make_rng

#: Seed-stream indices of the tests (shared with `resampling`: 1, 2 and 6).
SUBSETS, MATCHING, METHOD, SOURCES = 3, 4, 5, 7
#: Beyond this many subsets of samples, only the leave-one-sample-out subsets are fitted.
MAX_SUBSETS = 30
#: Host-mass bins (dex) within which the samples are thinned to a common shape.
MATCHING_BIN = 0.2
#: Central fraction of each sample's host masses that defines its range.
MATCHING_QUANTILES = (2.5, 97.5)
MIN_OBJECTS = 5


# ----- leave samples out ----------------------------------------------------------------------
def leave_samples_out(ctx):
    """k from every subset of at least two samples against the full data's k (nested pulls)."""
    title = "Leave samples out"
    null = "Every sample measures the same k: the k of any subset of samples agrees with the full k."
    statistic = ("largest |pull| of subset k against the full k, pull = (k_S - k) / sqrt(σ_S² - σ²) "
                 "(nested estimators; Hausman 1978), Bonferroni-combined over subsets")
    cat = ctx.data.catalog
    names = cat.sample_names
    if len(names) < 3:
        return skipped_result("leave_samples_out", title, null, statistic,
                              f"{len(names)} sample(s): with fewer than three, every subset of two or "
                              "more samples is the full data")
    subsets = [c for size in range(2, len(names)) for c in combinations(names, size)]
    if len(subsets) > MAX_SUBSETS:
        subsets = list(combinations(names, len(names) - 1))
    rows = []
    for i, subset in enumerate(subsets):
        fit = ctx.fitter(cat.subset(np.isin(cat.sample, subset)),
                         seed=child_seed(ctx.seed, SUBSETS, i, 1))
        rows.append(pull_row(fit, ctx.observed, samples=list(subset),
                             left_out=[n for n in names if n not in subset]))
    return _combined_result(
        ctx, "leave_samples_out", title, null, statistic, rows, "subsets",
        lambda w, p: (f"across {len(rows)} subsets the largest shift is from leaving out "
                      f"{', '.join(w['left_out'])} (k = {w['k']:.2f} ± {w['k_std']:.2f} against "
                      f"{ctx.observed['k']:.2f}, pull {w['pull']:+.2f}; combined p = {p:.3g})."),
        lambda w: ("k depends on which samples are included: a sample is inconsistent with the rest "
                   "(a calibration offset, a selection or a host-mass difference specific to it)."))


def _combined_result(ctx, name, title, null, statistic, rows, key, describe, failure):
    """The result of a test of several subsets' pulls (Bonferroni-combined): `describe(worst, p)`
    words the largest shift, `failure(worst)` what a failure means."""
    p, passed, worst, floor = combined_pulls(rows, ctx.alpha)
    note = f"{pass_words(passed)}: {describe(worst, p)} " + ("" if passed else failure(worst)) + floor
    return make_result(name, title, null_hypothesis=null, statistic=statistic,
                       value=float(abs(worst["pull"])), p_value=p, threshold=threshold_text(ctx.alpha),
                       passed=passed, note=note, details={key: rows})


# ----- host-mass matching ---------------------------------------------------------------------
def matched_rows(catalog, rng, bin_width=MATCHING_BIN, quantiles=MATCHING_QUANTILES):
    """Rows of a host-mass-matched subsample and the common range (log10 Msun).

    Every sample is cut to the overlap of the samples' central host-mass ranges and thinned at
    random, bin by bin, to a common shape: in bin b a sample with N objects in the overlap keeps
    round(N min_j(n_jb / N_j)) of its n_b objects. Samples left with fewer than MIN_OBJECTS objects
    are dropped. Returns (rows or None, [low, high]).
    """
    names = catalog.sample_names
    s = np.asarray(catalog.log_mstar, dtype=float)
    lows = [np.percentile(s[catalog.sample == n], quantiles[0]) for n in names]
    highs = [np.percentile(s[catalog.sample == n], quantiles[1]) for n in names]
    low, high = float(max(lows)), float(min(highs))
    if not low < high:
        return None, [low, high]
    n_bins = max(1, int(np.ceil((high - low) / bin_width)))
    edges = np.linspace(low, high, n_bins + 1)
    inside = (s >= low) & (s <= high)
    which = np.clip(np.digitize(s, edges) - 1, 0, n_bins - 1)
    counts = np.array([[np.sum(inside & (catalog.sample == n) & (which == b)) for b in range(n_bins)]
                       for n in names], dtype=float)
    totals = counts.sum(axis=1, keepdims=True)
    if np.any(totals == 0):
        return None, [low, high]
    shape = np.min(counts / totals, axis=0)
    keep = []
    for i, name in enumerate(names):
        for b in range(n_bins):
            pool = np.flatnonzero(inside & (catalog.sample == name) & (which == b))
            target = int(min(round(totals[i, 0] * shape[b]), pool.size))
            keep.append(rng.choice(pool, size=target, replace=False))
    keep = np.sort(np.concatenate(keep))
    labels = catalog.sample[keep]
    enough = [n for n in names if np.sum(labels == n) >= MIN_OBJECTS]
    keep = keep[np.isin(labels, enough)]
    return (keep if len(enough) >= 2 else None), [low, high]


def host_mass_matching(ctx):
    """k of host-mass-matched samples against the full k (nested pull)."""
    title = "Host-mass matching"
    null = ("k does not depend on how host masses are distributed in each sample: samples thinned to "
            "a common host-mass distribution give the same k.")
    statistic = "pull of the matched k against the full k, (k_m - k) / sqrt(σ_m² - σ²)"
    cat = ctx.data.catalog
    if len(cat.sample_names) < 2:
        return skipped_result("host_mass_matching", title, null, statistic, "there is only one sample")
    rows, (low, high) = matched_rows(cat, make_rng(child_seed(ctx.seed, MATCHING, 0)))
    if rows is None:
        return skipped_result("host_mass_matching", title, null, statistic,
                              f"the samples' host-mass ranges overlap too little (common range "
                              f"{low:.2f}-{high:.2f}); k then rests entirely on the assumed relation "
                              "across host masses")
    kept = {n: int(np.sum(cat.sample[rows] == n)) for n in cat.sample_names}
    if len(rows) == len(cat):
        return make_result("host_mass_matching", title, null_hypothesis=null, statistic=statistic,
                           value=0.0, p_value=1.0, threshold=threshold_text(ctx.alpha), passed=True,
                           note="passes: the samples already share one host-mass distribution.",
                           details={"range": [low, high], "kept": kept})
    fit = ctx.fitter(cat.subset(rows), seed=child_seed(ctx.seed, MATCHING, 0, 1))
    row = pull_row(fit, ctx.observed)
    pull, p = row["pull"], row["p"]
    passed = p >= ctx.alpha
    floor = floor_words(passed, row["p_unfloored"] >= ctx.alpha, "the variance of k_matched - k_full")
    note = (f"{pass_words(passed)}: matched in host mass ({low:.2f}-{high:.2f}, "
            f"{len(rows)} of {len(cat)} objects) k = {fit['k']:.2f} ± {fit['k_std']:.2f} against "
            f"{ctx.observed['k']:.2f} (pull {pull:+.2f}, p = {p:.3g}). ")
    if not passed:
        note += ("The samples' host-mass distributions differ and the assumed relation does not hold "
                 "across them (β ≠ 1 in the ratio form, or curvature): fit the 'relation' form or "
                 "use matched samples.")
    note += floor
    return make_result("host_mass_matching", title, null_hypothesis=null, statistic=statistic,
                       value=pull, p_value=p, threshold=threshold_text(ctx.alpha), passed=passed,
                       note=note, details={"range": [low, high], "kept": kept, "k_matched": fit["k"],
                                           "k_std_matched": fit["k_std"]})


# ----- single method --------------------------------------------------------------------------
def single_method(ctx):
    """k from each mass method that spans several samples, against the full k (nested pulls)."""
    title = "Single method"
    null = ("Mass-method offsets are constant in redshift: k from one method alone agrees with the "
            "full k.")
    statistic = ("largest |pull| of single-method k against the full k, Bonferroni-combined over "
                 "methods")
    cat = ctx.data.catalog
    methods = cat.method_names
    if len(methods) < 2:
        return skipped_result("single_method", title, null, statistic,
                              "every object has the same mass method, so the fit is already a "
                              "single-method fit")
    spanning = []
    for method in methods:
        rows = cat.method == method
        samples = [n for n in cat.sample_names if np.sum(rows & (cat.sample == n)) >= MIN_OBJECTS]
        if len(samples) >= 2:
            spanning.append(method)
    if not spanning:
        return skipped_result("single_method", title, null, statistic,
                              f"no mass method has {MIN_OBJECTS} or more objects in two or more samples")
    rows = []
    for i, method in enumerate(spanning):
        fit = ctx.fitter(cat.subset(cat.method == method), seed=child_seed(ctx.seed, METHOD, i, 1))
        rows.append(pull_row(fit, ctx.observed, method=method, n=int(np.sum(cat.method == method))))
    return _combined_result(
        ctx, "single_method", title, null, statistic, rows, "methods",
        lambda w, p: (f"method '{w['method']}' alone gives k = {w['k']:.2f} ± {w['k_std']:.2f} "
                      f"against {ctx.observed['k']:.2f} (pull {w['pull']:+.2f}; combined p = {p:.3g})."),
        lambda w: ("Mass-method offsets are not constant in redshift (e.g. a different calibration "
                   "in the high-z sample): the full k is driven by comparisons across methods."))


# ----- leave one source out ----------------------------------------------------------------------
def leave_sources_out(ctx):
    """k without each source (compilation) of the catalogue against the full k (nested pulls)."""
    title = "Leave one source out"
    null = ("Every source (the compilation a row came from) measures the same relation: leaving out "
            "any one source leaves k unchanged within its uncertainty.")
    statistic = ("largest |pull| of k without one source against the full k, pull = (k_-s - k) / "
                 "sqrt(σ_-s² - σ²) (nested estimators; Hausman 1978), Bonferroni-combined over sources")
    cat = ctx.data.catalog
    sources = cat.source_names
    if len(sources) < 2:
        reason = ("the catalogue has no source column, so there is nothing to leave out"
                  if sources == ("unspecified",) else
                  f"every row comes from one source ('{sources[0]}')")
        return skipped_result("leave_sources_out", title, null, statistic, reason)
    rows = []
    for i, source in enumerate(sources):
        keep = cat.source != source
        if np.sum(keep) < 2 * MIN_OBJECTS or np.unique(cat.z[keep]).size < 2:
            continue
        fit = ctx.fitter(cat.subset(keep), seed=child_seed(ctx.seed, SOURCES, i, 1))
        rows.append(pull_row(fit, ctx.observed, left_out=source, n_left_out=int(np.sum(~keep))))
    if not rows:
        return skipped_result("leave_sources_out", title, null, statistic,
                              "leaving out any one source leaves too few objects or a single redshift")
    return _combined_result(
        ctx, "leave_sources_out", title, null, statistic, rows, "sources",
        lambda w, p: (f"across {len(rows)} sources the largest shift is from leaving out "
                      f"'{w['left_out']}' ({w['n_left_out']} objects; k = {w['k']:.2f} ± "
                      f"{w['k_std']:.2f} against {ctx.observed['k']:.2f}, pull {w['pull']:+.2f}; "
                      f"combined p = {p:.3g})."),
        lambda w: (f"Source '{w['left_out']}' is inconsistent with the rest: an offset between "
                   "compilations (calibration, host-mass scale, selection) that k absorbs. Give the "
                   "sources their own mass-method labels or fit them separately."))
