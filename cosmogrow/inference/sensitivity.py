"""Significances named for what they are, and their sensitivity to assumptions (docs/method.md#verdicts).

The profile likelihood ratio against a reference k is computed from the likelihood alone, with
each offset prior N(0, w²) entered as a constraint term (an auxiliary measurement of the offset);
uniform prior ranges never enter it, k is profiled over the whole real line:

    Λ(k₀) = 2 [max_θ ln L_c(θ) − max_{θ: k = k₀} ln L_c(θ)],
    ln L_c(θ) = ln L(θ) − ½ Σ_j (δ_j / w_j)²,           σ-equivalent √Λ (Wilks 1938).

Beside it, the same ratio with the offsets unconstrained (the data alone). The sensitivity rows
repeat the fit with the offset constraints at ⅓×, 1×, 3× their configured widths (the posterior
by importance reweighting of draws from the Laplace approximation of each changed posterior; the
configured row is the MCMC chain itself), one row with the offsets unconstrained (maximum
likelihood and profile curvature: without a prior on the offsets there is no proper posterior to
report), and the k prior range halved and doubled (only the Bayes factor and a truncation move).
"""

import numpy as np
from scipy import stats

from ..seeding import child_seed
from .forked import BESIDE_MIN_OBJECTS, Beside
from .laplace import find_map, laplace
from .summary import describe_weighted, savage_dickey, wilks_sigma
from .verdicts import WIDTH_SCALES, k_key

# Importance draws per reweighted row: DRAW_BUDGET object-evaluations, between MIN and MAX draws.
# σ(k) shrinks as 1/√N, so fewer draws at large N keep the Monte Carlo error far below 0.05 in k.
DRAW_BUDGET = 1_500_000
MIN_DRAWS, MAX_DRAWS = 400, 6000
# Student-t proposal for the importance reweighting: heavier tails than the Laplace Gaussian.
PROPOSAL_DF = 5


_GROUP_WORDS = {"method": "mass methods", "host_type": "host types"}


def offset_constraints(model):
    """Indices and configured prior widths (dex) of every offset parameter of a model (mass
    methods and host types)."""
    return (np.asarray(model.layout.offset_indices, dtype=int),
            np.asarray(model.offset_widths, dtype=float))


def offset_subject(model):
    """What the offset constraints act on, in words ("the mass-method offsets", ...)."""
    kinds = [entry.kind for entry in model.layout.offset_entries()]
    words = [{"method": "mass-method", "host_type": "host-type"}[kind] for kind in dict.fromkeys(kinds)]
    return f"the {' and '.join(words)} offsets" if words else "the offsets"


def common_width(model):
    """The one configured width (dex) shared by every offset, or None when they differ."""
    widths = offset_constraints(model)[1]
    return float(widths[0]) if widths.size and np.all(widths == widths[0]) else None


def offset_label(model, scale=1.0):
    """Plain description of the offset constraint, e.g. "offsets constrained by N(0, 0.3 dex)";
    per kind when mass-method and host-type widths differ."""
    index, widths = offset_constraints(model)
    if widths.size == 0:
        return "no offset parameter"
    if scale is None:
        return "offsets unconstrained"
    if common_width(model) is not None:
        return f"offsets constrained by N(0, {widths[0] * scale:.2g} dex)"
    first = model.layout.offsets.start
    by_kind = {}
    for entry in model.layout.offset_entries():
        by_kind.setdefault(entry.kind, set()).add(round(float(widths[entry.index - first] * scale), 6))
    parts = [f"N(0, {', '.join(f'{w:.2g}' for w in sorted(values))} dex) for {_GROUP_WORDS[kind]}"
             for kind, values in by_kind.items()]
    return "offsets constrained by " + " and ".join(parts)


class ConstrainedLikelihood:
    """The likelihood with Gaussian constraint terms on the offsets (or none), inside ranges.

    Presents the interface the optimiser and Laplace code use (`log_prob`, `lower`, `upper`,
    `ndim`, `names`, `index_k`, `map_start`, `initial_guess`); `log_prob` is
    ln L(θ) − ½ Σ (δ_j / (scale w_j))², −inf outside the ranges. As a posterior density (for
    reweighting) it is the model's posterior with the offset widths scaled, up to a constant.

    Parameters
    ----------
    model : CoupledGrowthModel
    scale : float or None, multiple of the configured offset widths; None = unconstrained
    k_range : (float, float), range of k; (-inf, inf) for profiles (uniform ranges never enter)
    """

    def __init__(self, model, scale=1.0, k_range=(-np.inf, np.inf)):
        self.model = model
        self.names, self.ndim, self.index_k = model.names, model.ndim, model.index_k
        self.lower, self.upper = model.lower.copy(), model.upper.copy()
        self.lower[model.index_k], self.upper[model.index_k] = k_range
        self.map_start = model.map_start
        self._index, widths = offset_constraints(model)
        self._widths = None if scale is None or self._index.size == 0 else widths * scale

    def initial_guess(self):
        return self.model.initial_guess()

    def log_prob(self, theta):
        """ln L_c(θ), shape (n,); −inf outside the ranges."""
        theta = np.atleast_2d(theta)
        inside = np.all((theta > self.lower) & (theta < self.upper), axis=1)
        out = np.full(len(theta), -np.inf)
        if np.any(inside):
            value = self.model.log_likelihood(theta[inside])
            if self._widths is not None:
                value = value - 0.5 * np.sum((theta[inside][:, self._index] / self._widths) ** 2, axis=1)
            out[inside] = value
        out[~np.isfinite(out)] = -np.inf
        return out


def profile_significances(objective, k_refs, start, covariance=None):
    """σ-equivalents √Λ(k₀) of the profile ratio of `objective` against each reference k.

    With `covariance` (e.g. the Laplace covariance of the posterior), each fit at fixed k starts
    from the Gaussian's conditional mean of the other parameters at that k instead of the maximum
    (fewer iterations; the same maximum).

    Returns
    -------
    theta_max : ndarray, the maximum; sigmas : dict {k_key(k0): σ}
    """
    theta, log_max, _ = find_map(objective, start)
    index_k = objective.index_k
    fixed = {}
    for k_ref in k_refs:
        begin = theta
        if covariance is not None and covariance[index_k, index_k] > 0:
            begin = theta + covariance[:, index_k] / covariance[index_k, index_k] * (k_ref - theta[index_k])
            if not np.all(np.isfinite(begin)):
                begin = theta
        point, value, _ = find_map(objective, begin, fixed={index_k: float(k_ref)})
        if value > log_max:  # the free maximisation stopped short: take the better point
            theta, log_max = point, value
        fixed[k_key(k_ref)] = value
    return theta, {key: wilks_sigma(log_max, value) for key, value in fixed.items()}


def reweighted_draws(objective, start, n_draws, rng):
    """Draws from the Laplace approximation of `objective` and their importance weights.

    Returns
    -------
    draws : ndarray (n, ndim); weights : ndarray (n,), summing to 1; ess : float, effective size
    """
    approx = laplace(objective, start)
    proposal = stats.multivariate_t(loc=approx.theta, shape=approx.covariance, df=PROPOSAL_DF,
                                    allow_singular=True)
    draws = np.atleast_2d(proposal.rvs(size=n_draws, random_state=rng))
    log_weight = objective.log_prob(draws) - proposal.logpdf(draws)
    log_weight[~np.isfinite(log_weight)] = -np.inf
    if not np.any(np.isfinite(log_weight)):  # no draw inside the ranges: report no effective draw
        return draws, np.full(len(draws), 1.0 / len(draws)), 0.0
    weights = np.exp(log_weight - np.max(log_weight))
    weights /= weights.sum()
    return draws, weights, float(1.0 / np.sum(weights**2))


def _row(setting, value, label, k, sigmas, bayes, k_range, method, ess=None):
    return {"setting": setting, "value": value, "label": label,
            "k_median": k["median"] if k else None,
            "k_interval68": k["interval68"] if k else None,
            "sigma_vs_k0": sigmas.get("0"), "sigma_vs_k3": sigmas.get("3"), "sigma_by_k": sigmas,
            "bayes_factor_k0": bayes, "k_prior": [float(k_range[0]), float(k_range[1])],
            "k_prior_width": float(k_range[1] - k_range[0]), "method": method,
            "effective_draws": ess}


def default_draws(n_objects):
    """Importance draws per reweighted row for a catalogue of `n_objects` (see DRAW_BUDGET)."""
    return int(np.clip(DRAW_BUDGET // max(n_objects, 1), MIN_DRAWS, MAX_DRAWS))


def sensitivity_rows(model, approx, k_draws, k_refs, *, n_draws=None, seed=None, parallel=False,
                     timer=None):
    """The sensitivity table of a fit (docs/method.md#verdicts).

    Parameters
    ----------
    model : CoupledGrowthModel
    approx : LaplaceResult of the model's posterior (its MAP starts every maximisation)
    k_draws : ndarray, posterior draws of k from the MCMC chain (the configured row)
    k_refs : sequence of float, reference k values (0, 3 and claims)
    n_draws : int, importance-sampling draws per reweighted row (default `default_draws`)
    seed : int or SeedSequence; reweighted row j draws from `seeding.child_seed(seed, j)`
    parallel : bool, in catalogues of at least BESIDE_MIN_OBJECTS objects compute two of the rows
        in a forked process (`inference.forked.Beside`; the same rows as serially)
    timer : outputs.StageTimes, optional; receives the forked rows' seconds as work done beside

    Returns
    -------
    list of dict rows {setting, value, label, k_median, k_interval68, sigma_vs_k0, sigma_vs_k3,
    sigma_by_k, bayes_factor_k0, k_prior, k_prior_width, method, effective_draws}
    """
    n_draws = n_draws or default_draws(len(model.design.m_obs))
    k_range = tuple(model.priors["k"])
    has_offsets = offset_constraints(model)[0].size > 0
    scales = WIDTH_SCALES if has_offsets else (1.0,)
    setting = "offset_width_scale" if has_offsets else "as_configured"
    jobs = [(_scale_row, (model, approx, k_draws, k_refs, setting, scale, n_draws, child_seed(seed, j)))
            for j, scale in enumerate(scales)]
    if has_offsets:
        jobs.append((_unconstrained_row, (model, approx, k_refs, k_range)))
    rows = [None] * len(jobs)
    split = parallel and len(jobs) > 1 and len(model.design.m_obs) >= BESIDE_MIN_OBJECTS
    # rows computed beside, in a child: the first and the last (with offsets: ⅓× and unconstrained),
    # so that the two reweighted rows, the costly ones, run one in each process
    there = [0, len(jobs) - 1] if split else []
    pending = Beside(_run_jobs, [jobs[i] for i in there], enabled=split)
    try:
        for i, (function, args) in enumerate(jobs):
            if i not in there:
                rows[i] = function(*args)
        if there:
            values, seconds = pending.result()
            if timer is not None and pending.forked:
                timer.beside("verdicts", seconds)
            for i, row in zip(there, values):
                rows[i] = row
    finally:
        pending.close()
    configured = next(row["sigma_by_k"] for row in rows if row["value"] == 1.0)
    rows += [_k_range_row(k_draws, k_range, factor, configured) for factor in (0.5, 2.0)]
    return rows


def _run_jobs(jobs):
    return [function(*args) for function, args in jobs]


def _scale_row(model, approx, k_draws, k_refs, setting, scale, n_draws, seed):
    """The row with the offset constraints at `scale` times their widths (1.0: the chain itself)."""
    k_range = tuple(model.priors["k"])
    best, sigmas = profile_significances(ConstrainedLikelihood(model, scale), k_refs, approx.theta,
                                         approx.covariance)
    if scale == 1.0:
        k = describe_weighted(k_draws)
        bayes = savage_dickey(k_draws, k_range)["value"]
        method, ess = "MCMC (the fit itself)", float(len(k_draws))
    else:
        inside = np.clip(best, model.lower, model.upper)  # the k prior range applies here
        draws, weights, ess = reweighted_draws(ConstrainedLikelihood(model, scale, k_range), inside,
                                               n_draws, np.random.default_rng(seed))
        k = describe_weighted(draws[:, model.index_k], weights)
        bayes = savage_dickey(draws[:, model.index_k], k_range, weights=weights)["value"]
        method = "Laplace + importance reweighting"
    return _row(setting, scale, offset_label(model, scale), k, sigmas, bayes, k_range, method, ess)


def _unconstrained_row(model, approx, k_refs, k_range):
    """Offsets free: maximum-likelihood k, its profile-curvature interval and the significances."""
    objective = ConstrainedLikelihood(model, None)
    theta, sigmas = profile_significances(objective, k_refs, approx.theta, approx.covariance)
    curvature = laplace(objective, theta)
    k_hat, k_std = float(curvature.theta[model.index_k]), float(curvature.std[model.index_k])
    identified = np.isfinite(k_std) and k_std < (k_range[1] - k_range[0])
    k = ({"median": k_hat, "interval68": [k_hat - k_std, k_hat + k_std]} if identified else None)
    return _row("offsets_unconstrained", None, offset_label(model, None), k, sigmas, None, k_range,
                "maximum likelihood ± profile curvature (no prior on the offsets, no posterior)")


def _k_range_row(k_draws, k_range, factor, sigmas):
    """The k prior range scaled about its centre: the posterior truncated or extended, B01 rescaled.

    For a uniform prior of width W, B01 = W L(k0) / ∫ L dk over the range; a new range W' gives
    B01' = B01 (W'/W) (∫_old L / ∫_new L). The ratio of integrals is the chain's mass inside a
    narrower range, or for a wider one the Gaussian (chain mean and spread) mass ratio.
    """
    centre, half = 0.5 * (k_range[0] + k_range[1]), 0.5 * factor * (k_range[1] - k_range[0])
    new_range = (centre - half, centre + half)
    inside = (k_draws > new_range[0]) & (k_draws < new_range[1])
    if factor < 1:
        mass_ratio = 1.0 / max(inside.mean(), 1.0 / len(k_draws))
        k = describe_weighted(k_draws[inside]) if inside.sum() > 10 else None
    else:
        gauss = stats.norm(np.mean(k_draws), np.std(k_draws, ddof=1))
        mass_ratio = ((gauss.cdf(k_range[1]) - gauss.cdf(k_range[0]))
                      / (gauss.cdf(new_range[1]) - gauss.cdf(new_range[0])))
        k = describe_weighted(k_draws)
    base = savage_dickey(k_draws, k_range)["value"]
    bayes = (None if base is None or not new_range[0] < 0.0 < new_range[1]
             else float(base * factor * mass_ratio))
    label = f"k prior [{new_range[0]:g}, {new_range[1]:g}] (W = {2 * half:g})"
    return _row("k_prior_range", [float(new_range[0]), float(new_range[1])], label, k, sigmas or {},
                bayes, new_range, "MCMC draws truncated or extended; Bayes factor rescaled by W")


def significance_block(rows, model):
    """The tests' significance entries: constrained (configured widths) and data alone."""
    configured = next(row for row in rows if row["setting"] in ("offset_width_scale", "as_configured")
                      and row["value"] == 1.0)
    free = next((row for row in rows if row["setting"] == "offsets_unconstrained"), configured)
    return {"sigma_vs_k0": configured["sigma_vs_k0"], "sigma_vs_k3": configured["sigma_vs_k3"],
            "significance_method": f"profile likelihood, {offset_label(model)}",
            "sigma_vs_k0_unconstrained": free["sigma_vs_k0"],
            "sigma_vs_k3_unconstrained": free["sigma_vs_k3"],
            "significance_method_unconstrained": ("profile likelihood, offsets unconstrained "
                                                  "(the data alone)" if free is not configured
                                                  else f"profile likelihood, {offset_label(model)}")}
