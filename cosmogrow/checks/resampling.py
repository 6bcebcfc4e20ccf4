"""Null tests by resampling (docs/method.md#null-tests): redshift permutation within blocks, the
reference split, and the k = 0 mocks of the data's design (the declared selection; the estimator's
false exclusions of k = 0).

Seeds: test t, repeat r uses ``child_seed(seed, t, r)`` for its random choices and
``child_seed(seed, t, r, 1)`` for its fit, so every number depends only on (seed, t, r). The two
k = 0 tests share one set of mocks (stream 6).
"""

import numpy as np
from scipy import stats

from ..campaigns.mocks import draw_replica
from ..inference.crosscheck import choose_reference
from ..seeding import child_seed, make_rng
from .context import (INTERVAL_LEVEL, binomial_two_sided_p, confounded_labels, make_result,
                      monte_carlo_p, predictive_p, skipped_result, two_sided_p)
from .wording import convergence_words, floor_words, pass_words, threshold_text

PERMUTATION, SPLIT, K0 = 1, 2, 6
MIN_OBJECTS = 5
_Z_INTERVAL = stats.norm.ppf(0.5 + INTERVAL_LEVEL / 2)


def _fit_many(ctx, stream, catalogs, selection_catalog=None):
    """Fit each catalogue of an iterable; returns (k, k_std, number not converged)."""
    ks, stds, unsound = [], [], 0
    for r, catalog in enumerate(catalogs):
        fit = ctx.fitter(catalog, seed=child_seed(ctx.seed, stream, r, 1),
                         selection_catalog=selection_catalog)
        ks.append(fit["k"])
        stds.append(fit["k_std"])
        unsound += not fit["converged"]
    return np.array(ks), np.array(stds), unsound


# ----- redshift permutation within blocks --------------------------------------------------------
def permutation_blocks(catalog):
    """Row indices of each block of equal (mass method, host type), in order of first appearance."""
    keys = np.array([f"{m}\x1f{h}" for m, h in zip(catalog.method, catalog.host_type)], dtype=object)
    return [np.flatnonzero(keys == key) for key in dict.fromkeys(keys.tolist())]


def block_permutation(blocks, n, rng):
    """An order of n rows that permutes rows only within each block."""
    order = np.arange(n)
    for rows in blocks:
        order[rows] = rows[rng.permutation(rows.size)]
    return order


def _blocks_words(catalog, blocks):
    labels = [f"{catalog.method[rows[0]]}/{catalog.host_type[rows[0]]}" for rows in blocks]
    plural = "s" if len(blocks) > 1 else ""
    return f"{len(blocks)} block{plural} of mass method/host type ({', '.join(labels)})"


def redshift_permutation(ctx):
    """Shuffle (z, sample) pairs within blocks of equal method and host type; the data's k/σ_k
    against the permuted ones.

    Permuting within blocks keeps fixed whatever is confounded with redshift (an offset between a
    local and a distant method or host type), as restricted permutations do for a nuisance factor
    (Good 2005, Permutation, Parametric and Bootstrap Tests of Hypotheses, Springer); dividing by
    each fit's σ_k makes the statistic studentised (Chung & Romano 2013, Ann. Statist. 41, 484).
    Passed = None when every block sits at one redshift (nothing can move).
    """
    title = "Redshift permutation"
    null = ("Within each block of equal mass method and host type, redshifts and sample labels carry "
            "no information about the black-hole masses (given host mass): the data's k/σ_k is a "
            "typical draw from its permutation distribution.")
    statistic = ("k/σ_k of the data against k/σ_k of fits with (z, sample) shuffled among objects of "
                 "the same mass method and host type: two-sided Student-t predictive p-value of the "
                 "permutation distribution")
    cat = ctx.data.catalog
    blocks = permutation_blocks(cat)
    if not any(np.unique(cat.z[rows]).size > 1 for rows in blocks):
        return skipped_result(
            "redshift_permutation", title, null, statistic,
            "every block of equal mass method and host type sits at a single redshift, so permuting "
            "within blocks changes nothing; a redshift trend across blocks cannot be told from an "
            "offset between them", details={"blocks": len(blocks)})
    orders = (block_permutation(blocks, len(cat), make_rng(child_seed(ctx.seed, PERMUTATION, r)))
              for r in range(ctx.repeats))
    # each object keeps the selection it was observed under (thresholds at its own z, sample)
    draws, stds, unsound = _fit_many(
        ctx, PERMUTATION, (cat.replace(z=cat.z[o], sample=cat.sample[o]) for o in orders),
        selection_catalog=cat)
    t_perm = draws / stds
    t_obs = ctx.observed["k"] / ctx.observed["k_std"]
    p_empirical = monte_carlo_p(abs(t_obs - np.mean(t_perm)), np.abs(t_perm - np.mean(t_perm)))
    p = predictive_p(t_obs, t_perm)
    p = p_empirical if not np.isfinite(p) else p
    passed = p >= ctx.alpha
    spread = np.std(t_perm, ddof=1) if len(t_perm) > 1 else 0.0
    note = (f"{pass_words(passed)}: the data's k/σ_k = {t_obs:.2f} against {len(draws)} permutations "
            f"within {_blocks_words(cat, blocks)} (k/σ_k = {np.mean(t_perm):.2f} ± {spread:.2f}; "
            f"p = {p:.3g}). ")
    if passed:
        note += "The redshift trend within blocks is not distinguishable from chance assignments of redshift."
    else:
        note += ("Within blocks of one method and host type, redshift carries information about the "
                 "masses beyond chance: a real redshift trend (a coupling) or a redshift-dependent "
                 "systematic or selection; the consistency tests tell which.")
    if len(blocks) > 1:
        note += (" Every permutation keeps each object's method and host type, so offsets between "
                 "blocks at different redshifts are kept too: this test sees only the trend inside "
                 "blocks.")
    note += convergence_words(unsound, len(draws))
    if any(ctx.data.selections.values()):
        note += (" Each shuffled object keeps the selection it was observed under, so the "
                 "selection-aware fit of a permutation has no redshift trend as its truth.")
    return make_result("redshift_permutation", title, null_hypothesis=null, statistic=statistic,
                       value=float(t_obs), p_value=p, threshold=threshold_text(ctx.alpha),
                       passed=passed, note=note,
                       interval=[float(np.percentile(t_perm, 2.5)), float(np.percentile(t_perm, 97.5))],
                       details={"k_observed": ctx.observed["k"], "t_observed": float(t_obs),
                                "k_permuted": draws, "k_std_permuted": stds, "t_permuted": t_perm,
                                "blocks": len(blocks), "p_empirical": p_empirical,
                                "not_converged": unsound})


# ----- reference split ---------------------------------------------------------------------------
def _split_catalogs(ctx, original, others, label):
    """Random halves of the reference sample moved to redshifts drawn from the other samples."""
    n = len(original)
    for j in range(ctx.repeats):
        rng = make_rng(child_seed(ctx.seed, SPLIT, j))
        moved = rng.permutation(n)[: n // 2]
        z = np.array(original.z)
        z[moved] = rng.choice(others, size=moved.size, replace=True)
        sample = np.array(original.sample)
        sample[moved] = label
        yield original.replace(z=z, sample=sample)


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
    ks, stds, unsound = _fit_many(ctx, SPLIT, _split_catalogs(ctx, original, others, f"{ref}:moved"),
                                  selection_catalog=original)
    n = len(ks)
    spread = float(np.var(ks, ddof=1)) if n > 1 else 0.0
    # Var(mean k_j) = Var_data(E[k | data]) + E[split variance] / S, with σ_j² estimating the total
    # variance of one split's k; floored at the split part alone, s²/S.
    raw_var = float(np.mean(stds**2)) - spread * (1 - 1 / n) if n > 1 else float(np.mean(stds**2))
    var = max(raw_var, spread / n) if n > 1 else raw_var
    z_stat = float(np.mean(ks) / np.sqrt(var))
    p = two_sided_p(z_stat)
    passed = p >= ctx.alpha
    raw_p = two_sided_p(np.mean(ks) / np.sqrt(raw_var)) if raw_var > 0 else 0.0
    note = (f"{pass_words(passed)}: over {n} random splits of '{ref}' the mean k is "
            f"{np.mean(ks):.2f} ± {np.sqrt(var):.2f} (z = {z_stat:.2f}, p = {p:.3g}). ")
    note += ("Moving objects in redshift alone does not create a signal." if passed else
             "The fit finds a coupling in a sample that cannot have one: something other than "
             "redshift drives k (the selection model's redshift dependence, priors, or host-mass "
             "structure). Do not trust k until this is understood.")
    note += floor_words(passed, raw_p >= ctx.alpha, "the null variance (at s²/S, the spread of the "
                        "splits alone)")
    note += convergence_words(unsound, n)
    return make_result("reference_split", title, null_hypothesis=null, statistic=statistic,
                       value=z_stat, p_value=p, threshold=threshold_text(ctx.alpha), passed=passed,
                       note=note, interval=[float(np.mean(ks) - 1.96 * np.sqrt(var)),
                                            float(np.mean(ks) + 1.96 * np.sqrt(var))],
                       details={"reference": ref, "k_splits": ks, "k_std_splits": stds,
                                "mean_k": float(np.mean(ks)), "null_std": float(np.sqrt(var)),
                                "not_converged": unsound})


# ----- k = 0 mocks of the data's design ----------------------------------------------------------
def k0_mocks(ctx):
    """Fits of `ctx.repeats` mocks of the data's design at k = 0 (cached on the context).

    Returns
    -------
    dict: k, k_std (arrays), not_converged (int), truth (the truth table of the mocks), offsets
    (their offsets against their priors, see `significance.offset_nuisances`)
    """
    if "k0_mocks" not in ctx.cache:
        truth, offsets = ctx.null_nuisances(0.0)
        mocks = (draw_replica(ctx.config, ctx.data, truth, child_seed(ctx.seed, K0, r))
                 for r in range(ctx.repeats))
        ks, stds, unsound = _fit_many(ctx, K0, mocks)
        ctx.cache["k0_mocks"] = {"k": ks, "k_std": stds, "not_converged": unsound, "truth": truth,
                                 "offsets": offsets}
    return ctx.cache["k0_mocks"]


def k0_with_selection(ctx):
    """The data's |k/σ_k| among mocks of its design at k = 0 with the declared selection."""
    title = "k = 0 with the data's selection"
    null = ("k = 0 and the declared selection is the whole selection: the data's significance is "
            "reached by mocks of their own design without coupling as often as by chance.")
    statistic = "k/σ_k of the data among k/σ_k of k = 0 mocks: two-sided Student-t predictive p-value"
    if not any(ctx.data.selections.values()):
        return skipped_result(
            "k0_with_selection", title, null, statistic,
            "no selection is declared, so the k = 0 mocks have none and the test cannot show "
            "whether the declared selection alone produces the estimate (its only question); "
            "the significance of k against 0 is the fit's")
    mocks = k0_mocks(ctx)
    ks, pulls = mocks["k"], mocks["k"] / mocks["k_std"]
    t_obs = ctx.observed["k"] / ctx.observed["k_std"]
    p_empirical = monte_carlo_p(abs(t_obs), np.abs(pulls))
    p = predictive_p(t_obs, pulls)
    p = p_empirical if not np.isfinite(p) else p
    passed = p >= ctx.alpha
    percentile = float(100 * np.mean(ks <= ctx.observed["k"]))
    note = (f"{pass_words(passed)}: {np.sum(np.abs(pulls) >= abs(t_obs))} of {len(pulls)} k = 0 mocks "
            f"reach the data's |k/σ| = {abs(t_obs):.2f} (p = {p:.3g}); the data's k = "
            f"{ctx.observed['k']:.2f} lies at the {percentile:.1f} percentile of the mocks' k. ")
    if not passed:
        note += ("The declared selection alone, with k = 0, does not produce an estimate this far "
                 "from 0: either k ≠ 0, or the selection is not fully declared (an undeclared cut "
                 "acts like a coupling). Check with `cosmogrow challenge` and the selection you "
                 "believe in.")
    note += convergence_words(mocks["not_converged"], len(ks))
    return make_result("k0_with_selection", title, null_hypothesis=null, statistic=statistic,
                       value=float(abs(t_obs)), p_value=p, threshold=threshold_text(ctx.alpha),
                       passed=passed, note=note,
                       interval=[float(np.percentile(ks, 2.5)), float(np.percentile(ks, 97.5))],
                       details={"k_mocks": ks, "k_std_mocks": mocks["k_std"],
                                "k_observed": ctx.observed["k"], "observed_pull": float(t_obs),
                                "p_empirical": p_empirical, "observed_percentile": percentile,
                                "not_converged": mocks["not_converged"], "truth": mocks["truth"].to_dict()})


def k0_false_exclusions(ctx):
    """How often the estimator excludes k = 0 in k = 0 mocks of the data's design (two-sided)."""
    level = f"{100 * INTERVAL_LEVEL:g} %"
    title = "False exclusions of k = 0"
    null = (f"The estimator's {level} intervals are calibrated on the data's design: k = 0 mocks "
            f"exclude k = 0 at the rate {100 * (1 - INTERVAL_LEVEL):g} %.")
    statistic = (f"number of k = 0 mocks whose {level} interval excludes 0, against "
                 f"binomial(n, {1 - INTERVAL_LEVEL:g}): two-sided mid-p value (too many and too few)")
    mocks = k0_mocks(ctx)
    pulls = mocks["k"] / mocks["k_std"]
    n, n_fp = len(pulls), int(np.sum(np.abs(pulls) > _Z_INTERVAL))
    expected = n * (1 - INTERVAL_LEVEL)
    p = binomial_two_sided_p(n_fp, n, 1 - INTERVAL_LEVEL)
    passed = p >= ctx.alpha
    note = (f"{pass_words(passed)}: {n_fp} of {n} k = 0 mocks ({100 * n_fp / n:.1f} %) exclude k = 0 "
            f"at {level}, {expected:.1f} expected (p = {p:.3g}). ")
    if not passed and n_fp > expected:
        note += ("The estimator excludes k = 0 too often on this design: its intervals are too "
                 "narrow or biased, and the data's significances are overstated.")
    elif not passed:
        note += ("The estimator excludes k = 0 too rarely on this design: its intervals are too "
                 "wide, and the data's significances are understated.")
    pulls = mocks["offsets"]["pulls"]
    if pulls and not passed and confounded_labels(ctx.data.catalog):
        note += (" Mass method or host type goes with redshift here, and the mocks carry the offsets "
                 "the data need at k = 0 ("
                 + ", ".join(f"{name} at {pull:+.1f}σ of its prior" for name, pull in pulls.items())
                 + "): the fit's offset prior pulls them towards 0 and moves k, so on this design "
                 "the prior, not the data, sets part of k.")
    if not any(ctx.data.selections.values()):
        note += " No selection is declared: the mocks have none."
    note += convergence_words(mocks["not_converged"], n)
    return make_result("k0_false_exclusions", title, null_hypothesis=null, statistic=statistic,
                       value=n_fp, p_value=p, threshold=threshold_text(ctx.alpha), passed=passed,
                       note=note, details={"false_exclusions": n_fp, "mocks": n, "expected": expected,
                                           "offset_pulls": mocks["offsets"]["pulls"],
                                           "k_mocks": mocks["k"], "k_std_mocks": mocks["k_std"],
                                           "not_converged": mocks["not_converged"]})
