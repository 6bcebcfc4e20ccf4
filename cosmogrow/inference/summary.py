"""What a fit reports (docs/method.md#estimators): intervals, hypothesis tests, convergence, degeneracies."""

import numpy as np
from scipy import stats

OFFSET_WIDTHS = (0.05, 0.1, 0.2, 0.3, 0.5, 1.0)
# |corr(k, delta)| above this in the Laplace covariance is reported as a degeneracy.
DEGENERACY_CORRELATION = 0.9
# sigma(k) growing more than this factor between offset priors of 0.05 and 1 dex is a degeneracy.
WIDENING = 2.0
_KIND_WORDS = {"method": "method", "host_type": "host type"}


def describe_samples(values):
    """Median, mean, std and central 68/95 % intervals of 1-d draws."""
    values = np.asarray(values, dtype=float)
    q = np.percentile(values, [2.5, 16, 50, 84, 97.5])
    return {"median": q[2], "mean": float(np.mean(values)), "std": float(np.std(values, ddof=1)),
            "interval68": [q[1], q[3]], "interval95": [q[0], q[4]]}


def describe_parameters(names, samples):
    """describe_samples for every column of a (n, ndim) array of draws."""
    return {name: describe_samples(samples[:, i]) for i, name in enumerate(names)}


def weighted_quantiles(values, weights, quantiles):
    """Quantiles of weighted draws (weights need not be normalised); quantiles in [0, 1]."""
    order = np.argsort(values)
    values, weights = np.asarray(values, dtype=float)[order], np.asarray(weights, dtype=float)[order]
    cumulative = np.cumsum(weights) - 0.5 * weights
    return np.interp(np.asarray(quantiles) * weights.sum(), cumulative, values)


def describe_weighted(values, weights=None):
    """Median and central 68 % interval of (optionally weighted) 1-d draws."""
    values = np.asarray(values, dtype=float)
    if weights is None:
        low, median, high = np.percentile(values, [16, 50, 84])
    else:
        low, median, high = weighted_quantiles(values, weights, [0.16, 0.5, 0.84])
    return {"median": float(median), "interval68": [float(low), float(high)]}


def wilks_sigma(log_max, log_fixed):
    """Equivalent Gaussian significance of a 1-dof profile-likelihood ratio (Wilks 1938)."""
    delta = 2.0 * (log_max - log_fixed)
    if not np.isfinite(delta):
        return float("inf")
    return float(np.sqrt(max(delta, 0.0)))


def savage_dickey(k_samples, prior_range, k0=0.0, weights=None):
    """Bayes factor B_01 = p(k0 | data) / p(k0) for a uniform prior on k (Savage-Dickey ratio).

    The posterior density at k0 is a Gaussian KDE where k0 lies within 3 posterior standard
    deviations; further out a KDE has no draws to stand on, so the Gaussian approximation of the
    draws is used and the method says so. B_01 > 1 favours k = k0. `weights` (importance weights
    of the draws) enter the KDE and the moments. The value is proportional to the width
    W = high - low of the uniform prior, which is therefore reported beside it.
    """
    low, high = prior_range
    if not (np.isfinite(low) and np.isfinite(high) and low < k0 < high):
        return {"value": None, "log10": None, "method": "prior improper or excludes k0"}
    prior_density = 1.0 / (high - low)
    weights = np.ones(len(k_samples)) if weights is None else np.asarray(weights, dtype=float)
    weights = weights / weights.sum()
    mean = float(np.sum(weights * k_samples))
    # unbiased weighted variance (reduces to ddof = 1 for equal weights)
    std = float(np.sqrt(np.sum(weights * (k_samples - mean) ** 2) / (1.0 - np.sum(weights**2))))
    if abs(k0 - mean) <= 3 * std:
        density = float(stats.gaussian_kde(k_samples, weights=weights)(k0)[0])
        method = "kde"
        log_density = np.log(density) if density > 0 else -np.inf
    else:
        log_density = float(stats.norm.logpdf(k0, mean, std))
        method = "gaussian tail"
    log10_bf = (log_density - np.log(prior_density)) / np.log(10)
    return {"value": float(10**log10_bf) if log10_bf > -300 else 0.0, "log10": float(log10_bf), "method": method}


def hypothesis_tests(model, chain, significances):
    """P(k <= 0), the profile-likelihood significances (`sensitivity.significance_block`) and the
    Savage-Dickey B_01 with the width W of the uniform k prior it is proportional to."""
    k = chain.samples[:, model.index_k]
    low, high = model.priors["k"]
    bayes = savage_dickey(k, (low, high))
    return {"p_k_le_0": float(np.mean(k <= 0.0)), **significances,
            "bayes_factor_k0": bayes["value"], "log10_bayes_factor_k0": bayes["log10"],
            "bayes_factor_method": bayes["method"], "bayes_factor_k_prior": [float(low), float(high)],
            "bayes_factor_prior_width": float(high - low)}


def offset_sensitivity(model, laplace_result, widths=OFFSET_WIDTHS):
    """Laplace standard deviation of k as the Gaussian prior width of every method offset varies.

    The likelihood's curvature is the posterior's minus the prior's, so each width costs one
    matrix inverse, no refit (the MAP is held fixed: a first-order picture).
    """
    idx = model.layout.offset_indices
    if idx.size == 0:
        return []
    curvature = -laplace_result.hessian.copy()
    curvature[idx, idx] -= 1.0 / model.offset_widths**2
    rows = []
    for width in widths:
        trial = curvature.copy()
        trial[idx, idx] += 1.0 / width**2
        try:
            cov = np.linalg.inv(trial)
            std = float(np.sqrt(cov[model.index_k, model.index_k]))
        except np.linalg.LinAlgError:
            std = float("inf")
        rows.append({"offset_prior_width": width, "k_std": std})
    return rows


def degeneracy_warnings(model, catalog, laplace_result, sensitivity=None):
    """Plain-language warnings where k is degenerate with an offset (mass method or host type).

    An offset counts as degenerate with k when their Laplace correlation exceeds
    DEGENERACY_CORRELATION, or when sigma(k) grows more than WIDENING-fold as the offset prior
    widens from the narrowest to the widest width of `offset_sensitivity`.
    """
    warnings = []
    cov = laplace_result.covariance
    std = np.sqrt(np.clip(np.diag(cov), 1e-300, None))
    i_k = model.index_k
    rows = sensitivity if sensitivity is not None else offset_sensitivity(model, laplace_result)
    widening = rows[-1]["k_std"] / rows[0]["k_std"] if rows else 1.0
    first = model.layout.offsets.start
    for entry in model.layout.offset_entries():
        index, label, zero_point = entry.index, entry.label, entry.zero_point
        labels = getattr(catalog, entry.kind)
        z_zero = catalog.z[labels == zero_point]
        corr = cov[i_k, index] / (std[i_k] * std[index])
        z_group = catalog.z[labels == label]
        if abs(corr) > DEGENERACY_CORRELATION or widening > WIDENING:
            warnings.append(
                f"k is degenerate with the offset of {_KIND_WORDS[entry.kind]} '{label}' against "
                f"'{zero_point}' "
                f"(correlation {corr:+.2f}; redshifts {z_group.min():.3g}-{z_group.max():.3g} vs "
                f"{z_zero.min():.3g}-{z_zero.max():.3g}; sigma(k) grows {widening:.1f}-fold as the "
                f"offset prior widens from {rows[0]['offset_prior_width']:g} to "
                f"{rows[-1]['offset_prior_width']:g} dex): the width of k is set by the offset prior "
                f"({model.offset_widths[index - first]:.2g} dex), not by the data.")
    if model.gamma != 0:
        warnings.append(f"host growth gamma = {model.gamma:g} is fixed: from masses alone only "
                        f"k - beta*gamma is identified, so k depends on that choice.")
    return warnings


def convergence_block(chain, autocorr_factor):
    """Convergence facts of an ensemble run."""
    return {"converged": chain.converged, "tau_max": chain.tau_max, "n_steps": chain.n_steps,
            "n_walkers": chain.n_walkers, "acceptance": chain.acceptance,
            "chain_over_tau": chain.n_steps / chain.tau_max if chain.tau_max > 0 else None,
            "required_chain_over_tau": autocorr_factor, "burn_in": chain.burn, "thin": chain.thin,
            "n_samples": int(len(chain.samples)),
            "tau": {"values": chain.tau}}
