"""The six null tests (docs/method.md#null-tests). Each takes a `nullkit.NullContext` and returns one result
(`nullkit.make_result`): null hypothesis, statistic, value, p-value, threshold, pass/fail, note.

Seeds: test t, repeat r uses ``child_seed(seed, t, r)`` for its random choices and
``child_seed(seed, t, r, 1)`` for its fit, so every number depends only on (seed, t, r).
"""

from itertools import combinations

import numpy as np
from scipy import stats

from ..inference.crosscheck import choose_reference
from .context import (INTERVAL_LEVEL, binomial_excess_p, bonferroni, make_result, monte_carlo_p,
                        nested_pull, predictive_p, skipped_result, two_sided_p)
from ..campaigns.mocks import draw_replica
from ..seeding import child_seed, make_rng

PERMUTATION, SPLIT, SUBSETS, MATCHING, METHOD, K0 = 1, 2, 3, 4, 5, 6
#: Beyond this many subsets of samples, only the leave-one-sample-out subsets are fitted.
MAX_SUBSETS = 30
#: Host-mass bins (dex) within which the samples are thinned to a common shape.
MATCHING_BIN = 0.2
#: Central fraction of each sample's host masses that defines its range.
MATCHING_QUANTILES = (2.5, 97.5)
MIN_OBJECTS = 5
_Z_INTERVAL = stats.norm.ppf(0.5 + INTERVAL_LEVEL / 2)


def _threshold(alpha):
    return f"passes when p >= {alpha:g}"


def _combined_pulls(rows, alpha):
    """Bonferroni-combined p of per-subset pulls, whether it passes, and the worst subset."""
    p = bonferroni([row["p"] for row in rows])
    return p, p >= alpha, max(rows, key=lambda row: abs(row["pull"]))


def _pass_words(passed):
    return "passes" if passed else "FAILS"


def _convergence_words(unsound, total):
    if not unsound:
        return ""
    return (f" {unsound} of {total} fits did not converge (an unsound Laplace approximation or a "
            "capped chain); they are included.")


# ----- 1. redshift permutation -------------------------------------------------------------------
def redshift_permutation(ctx):
    """Shuffle (z, sample label) pairs among objects; the observed |k| against the permuted ones."""
    title = "Redshift permutation"
    null = ("Redshifts and sample labels carry no information about the black-hole masses (given "
            "host mass and method): the observed k is a typical draw from its permutation "
            "distribution.")
    statistic = ("k of the data against the k of fits with (z, sample) shuffled among objects: "
                 "two-sided Student-t predictive p-value of the permutation distribution")
    cat = ctx.data.catalog
    draws, stds, unsound = [], [], 0
    for r in range(ctx.repeats):
        order = make_rng(child_seed(ctx.seed, PERMUTATION, r)).permutation(len(cat))
        shuffled = cat.replace(z=cat.z[order], sample=cat.sample[order])
        # each object keeps the selection it was observed under (thresholds at its own z, sample)
        fit = ctx.fitter(shuffled, seed=child_seed(ctx.seed, PERMUTATION, r, 1), selection_catalog=cat)
        draws.append(fit["k"])
        stds.append(fit["k_std"])
        unsound += not fit["converged"]
    draws, stds = np.array(draws), np.array(stds)
    k_obs = ctx.observed["k"]
    p_empirical = monte_carlo_p(abs(k_obs), np.abs(draws))
    p = predictive_p(k_obs, draws)
    p = p_empirical if not np.isfinite(p) else p
    passed = p >= ctx.alpha
    false_positive = float(np.mean(np.abs(draws / stds) > _Z_INTERVAL))
    note = (f"{_pass_words(passed)}: the data's k = {k_obs:.2f} against {len(draws)} permutations "
            f"(k = {np.mean(draws):.2f} ± {np.std(draws, ddof=1) if len(draws) > 1 else 0:.2f}; "
            f"p = {p:.3g}; {np.sum(np.abs(draws) >= abs(k_obs))} reach |k| as large). ")
    if passed:
        note += "The redshift trend is not distinguishable from chance assignments of redshift."
    else:
        note += ("Redshift and sample carry information about the masses beyond chance: a real "
                 "redshift trend (a coupling) or a redshift-dependent systematic or selection; the "
                 "consistency tests tell which.")
    note += (f" Permuted fits scatter by {np.std(draws, ddof=1):.2f} in k against a typical fit "
             f"uncertainty of {np.median(stds):.2f}; {100 * false_positive:.0f} % of them exclude "
             f"k = 0 at {100 * INTERVAL_LEVEL:g} %.") if len(draws) > 1 else ""
    note += _convergence_words(unsound, len(draws))
    if any(ctx.data.selections.values()):
        note += (" Each shuffled object keeps the selection it was observed under, so the "
                 "selection-aware fit of a permutation has k = 0 as its truth.")
    return make_result("redshift_permutation", title, null_hypothesis=null, statistic=statistic,
                       value=k_obs, p_value=p, threshold=_threshold(ctx.alpha), passed=passed,
                       note=note, interval=[float(np.percentile(draws, 2.5)),
                                            float(np.percentile(draws, 97.5))],
                       details={"k_observed": k_obs, "k_permuted": draws, "k_std_permuted": stds,
                                "p_empirical": p_empirical, "fraction_excluding_0": false_positive,
                                "not_converged": unsound})


# ----- 2. reference split ------------------------------------------------------------------------
def reference_split(ctx):
    """Half of the lowest-redshift sample moved to high redshift: k must be consistent with 0."""
    title = "Reference split"
    null = ("Half of the lowest-redshift sample, given redshifts drawn from the other samples, is "
            "the same population as the other half: k = 0.")
    statistic = ("split-averaged k over its null standard deviation, z = mean(k_j) / sqrt(max(mean(σ_j²) "
                 "- s²(1 - 1/S), s²/S)) (law of total variance; s² = variance of k_j across the S "
                 "splits)")
    cat = ctx.data.catalog
    ref = choose_reference(cat)
    others = cat.z[cat.sample != ref]
    rows = np.flatnonzero(cat.sample == ref)
    if others.size == 0:
        return skipped_result("reference_split", title, null, statistic,
                              "there is only one sample, so no higher redshifts to move objects to")
    if rows.size < 2 * MIN_OBJECTS:
        return skipped_result("reference_split", title, null, statistic,
                              f"the reference sample '{ref}' has {rows.size} objects; at least "
                              f"{2 * MIN_OBJECTS} are needed")
    original = cat.subset(rows)
    moved_label = f"{ref}:moved"
    ks, stds, unsound = [], [], 0
    for j in range(ctx.repeats):
        rng = make_rng(child_seed(ctx.seed, SPLIT, j))
        moved = rng.permutation(rows.size)[: rows.size // 2]
        z = np.array(original.z)
        z[moved] = rng.choice(others, size=moved.size, replace=True)
        label = np.array(original.sample)
        label[moved] = moved_label
        split = original.replace(z=z, sample=label)
        fit = ctx.fitter(split, seed=child_seed(ctx.seed, SPLIT, j, 1), selection_catalog=original)
        ks.append(fit["k"])
        stds.append(fit["k_std"])
        unsound += not fit["converged"]
    ks, stds = np.array(ks), np.array(stds)
    n = len(ks)
    spread = float(np.var(ks, ddof=1)) if n > 1 else 0.0
    mean_var = float(np.mean(stds**2))
    # Var(mean k_j) = Var_data(E[k | data]) + E[split variance] / S, with σ_j² estimating the total
    # variance of one split's k; floored at the split part alone, s²/S.
    var = max(mean_var - spread * (1 - 1 / n), spread / n) if n > 1 else mean_var
    z_stat = float(np.mean(ks) / np.sqrt(var))
    p = two_sided_p(z_stat)
    passed = p >= ctx.alpha
    note = (f"{_pass_words(passed)}: over {n} random splits of '{ref}' the mean k is "
            f"{np.mean(ks):.2f} ± {np.sqrt(var):.2f} (z = {z_stat:.2f}, p = {p:.3g}). ")
    note += ("Moving objects in redshift alone does not create a signal." if passed else
             "The fit finds a coupling in a sample that cannot have one: something other than "
             "redshift drives k (the selection model's redshift dependence, priors, or host-mass "
             "structure). Do not trust k until this is understood.")
    note += _convergence_words(unsound, n)
    return make_result("reference_split", title, null_hypothesis=null, statistic=statistic,
                       value=z_stat, p_value=p, threshold=_threshold(ctx.alpha), passed=passed,
                       note=note, interval=[float(np.mean(ks) - 1.96 * np.sqrt(var)),
                                            float(np.mean(ks) + 1.96 * np.sqrt(var))],
                       details={"reference": ref, "k_splits": ks, "k_std_splits": stds,
                                "mean_k": float(np.mean(ks)), "null_std": float(np.sqrt(var)),
                                "not_converged": unsound})


# ----- 3. leave samples out ----------------------------------------------------------------------
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
        pull = nested_pull(fit, ctx.observed)
        rows.append({"samples": list(subset), "left_out": [n for n in names if n not in subset],
                     "k": fit["k"], "k_std": fit["k_std"], "pull": float(pull), "p": two_sided_p(pull)})
    p, passed, worst = _combined_pulls(rows, ctx.alpha)
    note = (f"{_pass_words(passed)}: across {len(rows)} subsets the largest shift is from leaving out "
            f"{', '.join(worst['left_out'])} (k = {worst['k']:.2f} ± {worst['k_std']:.2f} against "
            f"{ctx.observed['k']:.2f}, pull {worst['pull']:+.2f}; combined p = {p:.3g}). ")
    if not passed:
        note += ("k depends on which samples are included: a sample is inconsistent with the rest "
                 "(a calibration offset, a selection or a host-mass difference specific to it).")
    return make_result("leave_samples_out", title, null_hypothesis=null, statistic=statistic,
                       value=float(abs(worst["pull"])), p_value=p, threshold=_threshold(ctx.alpha),
                       passed=passed, note=note, details={"subsets": rows})


# ----- 4. host-mass matching ---------------------------------------------------------------------
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
                           value=0.0, p_value=1.0, threshold=_threshold(ctx.alpha), passed=True,
                           note="passes: the samples already share one host-mass distribution.",
                           details={"range": [low, high], "kept": kept})
    fit = ctx.fitter(cat.subset(rows), seed=child_seed(ctx.seed, MATCHING, 0, 1))
    pull = float(nested_pull(fit, ctx.observed))
    p = two_sided_p(pull)
    passed = p >= ctx.alpha
    note = (f"{_pass_words(passed)}: matched in host mass ({low:.2f}-{high:.2f}, "
            f"{len(rows)} of {len(cat)} objects) k = {fit['k']:.2f} ± {fit['k_std']:.2f} against "
            f"{ctx.observed['k']:.2f} (pull {pull:+.2f}, p = {p:.3g}). ")
    if not passed:
        note += ("The samples' host-mass distributions differ and the assumed relation does not hold "
                 "across them (β ≠ 1 in the ratio form, or curvature): fit the 'relation' form or "
                 "use matched samples.")
    return make_result("host_mass_matching", title, null_hypothesis=null, statistic=statistic,
                       value=pull, p_value=p, threshold=_threshold(ctx.alpha), passed=passed,
                       note=note, details={"range": [low, high], "kept": kept, "k_matched": fit["k"],
                                           "k_std_matched": fit["k_std"]})


# ----- 5. single method --------------------------------------------------------------------------
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
        pull = nested_pull(fit, ctx.observed)
        rows.append({"method": method, "n": int(np.sum(cat.method == method)), "k": fit["k"],
                     "k_std": fit["k_std"], "pull": float(pull), "p": two_sided_p(pull)})
    p, passed, worst = _combined_pulls(rows, ctx.alpha)
    note = (f"{_pass_words(passed)}: method '{worst['method']}' alone gives k = {worst['k']:.2f} ± "
            f"{worst['k_std']:.2f} against {ctx.observed['k']:.2f} (pull {worst['pull']:+.2f}; "
            f"combined p = {p:.3g}). ")
    if not passed:
        note += ("Mass-method offsets are not constant in redshift (e.g. a different calibration in "
                 "the high-z sample): the full k is driven by comparisons across methods.")
    return make_result("single_method", title, null_hypothesis=null, statistic=statistic,
                       value=float(abs(worst["pull"])), p_value=p, threshold=_threshold(ctx.alpha),
                       passed=passed, note=note, details={"methods": rows})


# ----- 6. k = 0 with the data's selection ----------------------------------------------------------
def k0_with_selection(ctx):
    """Mocks of the data's design at k = 0 with the declared selection, fitted as the data."""
    title = "k = 0 with the data's selection"
    null = ("k = 0 and the declared selection is the whole selection: the data's significance is "
            "reached by mocks of their own design without coupling as often as by chance.")
    statistic = ("|k/σ_k| of the data among |k/σ_k| of k = 0 mocks (false-positive rate at the "
                 f"reported significance); also the mocks' rate of excluding k = 0 at "
                 f"{100 * INTERVAL_LEVEL:g} % against binomial({100 * (1 - INTERVAL_LEVEL):g} %)")
    truth = ctx.null_truth(0.0)
    ks, stds, unsound = [], [], 0
    for r in range(ctx.repeats):
        mock = draw_replica(ctx.config, ctx.data, truth, child_seed(ctx.seed, K0, r))
        fit = ctx.fitter(mock, seed=child_seed(ctx.seed, K0, r, 1))
        ks.append(fit["k"])
        stds.append(fit["k_std"])
        unsound += not fit["converged"]
    ks, stds = np.array(ks), np.array(stds)
    pulls = ks / stds
    t_obs = ctx.observed["k"] / ctx.observed["k_std"]
    p_empirical = monte_carlo_p(abs(t_obs), np.abs(pulls))
    p_obs = predictive_p(t_obs, pulls)
    p_obs = p_empirical if not np.isfinite(p_obs) else p_obs
    n_fp = int(np.sum(np.abs(pulls) > _Z_INTERVAL))
    p_fp = binomial_excess_p(n_fp, len(pulls), 1 - INTERVAL_LEVEL)
    p = min(1.0, 2.0 * min(p_obs, p_fp))  # Bonferroni over the two parts
    passed = p >= ctx.alpha
    percentile = float(100 * np.mean(ks <= ctx.observed["k"]))
    note = (f"{_pass_words(passed)}: {np.sum(np.abs(pulls) >= abs(t_obs))} of {len(pulls)} k = 0 mocks "
            f"reach the data's |k/σ| = {abs(t_obs):.2f} (predictive p = {p_obs:.3g}); the data's k = "
            f"{ctx.observed['k']:.2f} lies at the {percentile:.1f} percentile of the mocks' k. "
            f"{n_fp} mock{'' if n_fp == 1 else 's'} ({100 * n_fp / len(pulls):.1f} %) exclude k = 0 "
            f"at {100 * INTERVAL_LEVEL:g} % "
            f"(binomial p = {p_fp:.3g}). ")
    if p_obs < ctx.alpha / 2:
        note += ("The declared selection alone, with k = 0, does not produce an estimate this far "
                 "from 0: either k ≠ 0, or the selection is not fully declared (an undeclared cut "
                 "acts like a coupling). Check with `cosmogrow challenge` and the selection you "
                 "believe in. ")
    if p_fp < ctx.alpha / 2:
        note += ("The estimator excludes k = 0 too often in k = 0 mocks: its intervals are too "
                 "narrow for this design.")
    note += _convergence_words(unsound, len(ks))
    if not any(ctx.data.selections.values()):
        note += " No selection is declared: the mocks have none."
    return make_result("k0_with_selection", title, null_hypothesis=null, statistic=statistic,
                       value=float(abs(t_obs)), p_value=p, threshold=_threshold(ctx.alpha),
                       passed=passed, note=note.strip(),
                       interval=[float(np.percentile(ks, 2.5)), float(np.percentile(ks, 97.5))],
                       details={"k_mocks": ks, "k_std_mocks": stds, "k_observed": ctx.observed["k"],
                                "observed_pull": float(t_obs), "observed_p": p_obs,
                                "observed_p_empirical": p_empirical,
                                "false_positives": n_fp,
                                "false_positive_p": p_fp, "observed_percentile": percentile,
                                "not_converged": unsound,
                                "truth": truth.to_dict()})


TESTS = {"redshift_permutation": redshift_permutation, "reference_split": reference_split,
         "leave_samples_out": leave_samples_out, "host_mass_matching": host_mass_matching,
         "single_method": single_method, "k0_with_selection": k0_with_selection}
