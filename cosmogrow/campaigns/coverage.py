"""Calibration statistics of a campaign's results (docs/method.md#calibration).

Per injected k and estimator: bias, RMSE, interval widths, coverage of the 68/95 % intervals with
binomial errors, power to exclude k = 0 and k = 3. Simulation-based calibration (Talts et al. 2018,
arXiv:1804.06788): the rank of the true k among L posterior draws is uniform on {0, ..., L} for a
calibrated posterior; binned ranks are compared with a uniform histogram by a chi-square test.
"""

import numpy as np
from scipy import stats

#: Coverage is judged against the central intervals the fits report: 16-84 % and 2.5-97.5 %.
LEVELS = {"68": 0.68, "95": 0.95}
EXCLUDED_VALUES = (0.0, 3.0)


def binomial_error(p, n):
    """Standard error of a fraction p estimated from n trials (NaN for n = 0)."""
    return float(np.sqrt(p * (1.0 - p) / n)) if n > 0 else float("nan")


def recovery_block(k_true, estimate, std, lo68, hi68, lo95, hi95, converged):
    """Calibration of one injected k and one estimator.

    Parameters
    ----------
    k_true : float, injected k
    estimate, std : arrays (R,), the estimates of k and their posterior standard deviations
    lo68, hi68, lo95, hi95 : arrays (R,), interval bounds
    converged : array of bool (R,)

    Returns
    -------
    dict: n, n_failed (non-finite estimates, left out), n_not_converged, bias (mean estimate -
    k_true) with its standard error, bias_over_sigma (bias / median std), median_std, rmse,
    median_width68/95, coverage68/95 each with binomial error and the nominal level, and the power
    to exclude k = 0 and k = 3 (fraction of 95 % intervals without them).
    """
    arrays = [np.asarray(a, dtype=float) for a in (estimate, std, lo68, hi68, lo95, hi95)]
    ok = np.all([np.isfinite(a) for a in arrays], axis=0)
    estimate, std, lo68, hi68, lo95, hi95 = (a[ok] for a in arrays)
    n = int(ok.sum())
    out = {"k_injected": float(k_true), "n": n, "n_failed": int((~ok).sum()),
           "n_not_converged": int(np.sum(~np.asarray(converged, dtype=bool)[ok]))}
    if n == 0:
        return out
    error = estimate - k_true
    median_std = float(np.median(std))
    bias = float(np.mean(error))
    out.update({
        "bias": bias,
        "bias_error": float(np.std(error, ddof=1) / np.sqrt(n)) if n > 1 else float("nan"),
        "bias_over_sigma": bias / median_std if median_std > 0 else float("nan"),
        "median_std": median_std,
        "rmse": float(np.sqrt(np.mean(error**2))),
        "median_width68": float(np.median(hi68 - lo68)),
        "median_width95": float(np.median(hi95 - lo95)),
    })
    for level, (lo, hi) in {"68": (lo68, hi68), "95": (lo95, hi95)}.items():
        fraction = float(np.mean((lo <= k_true) & (k_true <= hi)))
        out[f"coverage{level}"] = fraction
        out[f"coverage{level}_error"] = binomial_error(fraction, n)
        out[f"coverage{level}_nominal"] = LEVELS[level]
        out[f"coverage{level}_band3"] = 3 * binomial_error(LEVELS[level], n)
    for value in EXCLUDED_VALUES:
        power = float(np.mean((value < lo95) | (value > hi95)))
        out[f"power_exclude_k{value:g}"] = power
        out[f"power_exclude_k{value:g}_error"] = binomial_error(power, n)
    return out


def sbc_rank(k_true, draws):
    """Rank of the truth among posterior draws: the number of draws below it (0 ... L)."""
    return int(np.sum(np.asarray(draws) < k_true))


def rank_bins(n_draws, n_ranks_observed, max_bins=20, min_expected=5):
    """Number of equal-width bins for ranks 0..L: a divisor of L + 1, at most `max_bins`, with at
    least `min_expected` ranks expected per bin (at least 2 bins)."""
    size = n_draws + 1
    divisors = [b for b in range(2, min(max_bins, size) + 1) if size % b == 0]
    good = [b for b in divisors if n_ranks_observed / b >= min_expected]
    return max(good) if good else (min(divisors) if divisors else 1)


def sbc_block(ranks, n_draws, prior):
    """Uniformity test of SBC ranks.

    Parameters
    ----------
    ranks : array of int, ranks in 0..n_draws
    n_draws : int, L, posterior draws per mock
    prior : (low, high), the range k was drawn from

    Returns
    -------
    dict: n, n_draws, prior, bins, counts (histogram of the ranks), expected count per bin, chi2,
    dof, p_value (chi-square test of uniformity), and the mean normalised rank (0.5 ideally; above
    0.5 the truth tends to lie above the draws, i.e. the estimator is biased low).
    """
    ranks = np.asarray(ranks, dtype=int)
    n = len(ranks)
    bins = rank_bins(n_draws, n)
    width = (n_draws + 1) // bins
    counts = np.bincount(ranks // width, minlength=bins)[:bins]
    expected = n / bins
    out = {"n": n, "n_draws": int(n_draws), "prior": [float(prior[0]), float(prior[1])],
           "bins": int(bins), "ranks_per_bin": int(width), "counts": counts.tolist(),
           "expected_per_bin": float(expected)}
    if n == 0 or bins < 2:
        return out
    chi2, p_value = stats.chisquare(counts)
    out.update({"chi2": float(chi2), "dof": int(bins - 1), "p_value": float(p_value),
                "mean_normalised_rank": float(np.mean(ranks) / n_draws)})
    return out
