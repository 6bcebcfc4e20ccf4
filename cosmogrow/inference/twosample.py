"""Two-sample tests on one merged sort: Kolmogorov–Smirnov, Anderson–Darling, Epps–Singleton.

The cross-check (docs/method.md#estimators) compares two samples at every k of a grid. Each
comparison here costs a sort of each sample and a linear merge, O(N log N), after which the three
statistics come from running counts:

- Kolmogorov–Smirnov: D = max |F_a - F_b| over the pooled values. p-value: the exact distribution
  (scipy.stats.ks_2samp, method "exact") when n_a n_b <= `KS_EXACT_MAX_PRODUCT`, else the
  asymptotic one-sample distribution of D at the effective size n_a n_b / (n_a + n_b)
  (scipy.stats.kstwo; Hodges 1957 discusses the approximation).
- Anderson–Darling, k-sample form with midranks for ties (Scholz & Stephens 1987, JASA 82, 918,
  their eq. 7); p-value from their table-2 interpolation of critical values, which is only tabulated
  for 0.001 <= p <= 0.25: the p-value is clipped to that range, as scipy.stats.anderson_ksamp does.
- Epps–Singleton (Epps & Singleton 1986, J. Stat. Comput. Simul. 26, 177): the empirical
  characteristic function at t = 0.4 and 0.8 divided by the pooled semi-interquartile range,
  a chi-squared statistic with (up to) four degrees of freedom and their small-sample correction
  below 25 objects. Because t2 = 2 t1, cos and sin are evaluated once and doubled.

The statistics equal scipy.stats' ks_2samp, anderson_ksamp (variant "midrank") and
epps_singleton_2samp to rounding (tests/test_twosample.py holds them to that).
"""

import numpy as np
from scipy import stats

#: Largest n_a * n_b for which the Kolmogorov–Smirnov p-value is computed exactly (cost ~ n_a n_b);
#: above it the asymptotic distribution is used.
KS_EXACT_MAX_PRODUCT = 40_000
#: Epps–Singleton evaluation points, in units of the inverse pooled semi-interquartile range.
ES_T = (0.4, 0.8)
# Scholz & Stephens (1987) table 2: interpolation coefficients of the critical values.
_AD_B0 = np.array([0.675, 1.281, 1.645, 1.96, 2.326, 2.573, 3.085])
_AD_B1 = np.array([-0.245, 0.25, 0.678, 1.149, 1.822, 2.364, 3.615])
_AD_B2 = np.array([-0.105, -0.305, -0.362, -0.391, -0.396, -0.345, -0.154])
_AD_LEVELS = np.array([0.25, 0.1, 0.05, 0.025, 0.01, 0.005, 0.001])


class PairComparison:
    """Repeated comparisons of two samples of fixed sizes n_a and n_b (constants computed once)."""

    def __init__(self, n_a: int, n_b: int):
        self.n_a, self.n_b = int(n_a), int(n_b)
        self.n = self.n_a + self.n_b
        self._ad_sigma = _ad_sigma(self.n_a, self.n_b)
        self._untied = None

    def statistics(self, a: np.ndarray, b: np.ndarray, with_es: bool = True) -> tuple:
        """(D, A2 standardised, ES W, ES degrees of freedom) of samples `a` and `b` (1-D arrays)."""
        # two sorted runs: the stable (run-merging) argsort of their concatenation is a linear merge
        runs = np.concatenate([np.sort(a), np.sort(b)])
        order = np.argsort(runs, kind="stable")
        values = runs[order]
        count_a = np.cumsum(order < self.n_a)
        ends = np.flatnonzero(np.diff(values) != 0)
        if len(ends) == self.n - 1:  # no ties: every pooled value closes a group
            ends = np.arange(self.n)
            ca = count_a.astype(float)
        else:
            ends = np.append(ends, self.n - 1)
            ca = count_a[ends].astype(float)
        cb = (ends + 1) - ca
        d = float(np.max(np.abs(ca / self.n_a - cb / self.n_b)))
        a2 = self._anderson_darling(ends, ca, cb)
        w, dof = _epps_singleton(a, b, values) if with_es else (np.nan, 0)
        return d, a2, w, dof

    def _anderson_darling(self, ends, ca, cb):
        n = self.n
        if len(ends) == n:  # no ties: every group has one value and the weights are fixed
            b_mid, weight = self._untied_weights()
            ties = 1.0
        else:
            starts = np.concatenate([[0], ends[:-1] + 1])
            ties = (ends - starts + 1).astype(float)
            b_mid = starts + ties / 2.0
            with np.errstate(invalid="ignore", divide="ignore"):  # one value only: undefined (NaN)
                weight = ties / n / (b_mid * (n - b_mid) - n * ties / 4.0)
        total = 0.0
        for counts, size in ((ca, self.n_a), (cb, self.n_b)):
            step = np.diff(counts, prepend=0.0)
            m_mid = counts - step / 2.0
            with np.errstate(invalid="ignore"):  # NaN weight (one value only) gives NaN
                total += np.dot(weight, (n * m_mid - b_mid * size) ** 2) / size
        a2kn = total * (n - 1.0) / n
        return (a2kn - 1.0) / self._ad_sigma

    def _untied_weights(self):
        if self._untied is None:
            n = self.n
            b_mid = np.arange(n) + 0.5
            self._untied = (b_mid, 1.0 / n / (b_mid * (n - b_mid) - n / 4.0))
        return self._untied

    def ks_pvalues(self, d: np.ndarray, pairs=None) -> np.ndarray:
        """p-values of KS distances `d`; `pairs` (list of (a, b)) gives the data for exact values."""
        d = np.asarray(d, dtype=float)
        if self.n_a * self.n_b <= KS_EXACT_MAX_PRODUCT and pairs is not None:
            return np.array([stats.ks_2samp(a, b, method="exact").pvalue for a, b in pairs])
        effective = np.round(self.n_a * self.n_b / self.n)
        return stats.kstwo.sf(d, effective)


def ad_pvalues(a2: np.ndarray) -> np.ndarray:
    """Anderson–Darling (two samples) p-values of standardised statistics, clipped to [0.001, 0.25].

    Scholz & Stephens (1987) interpolate log p quadratically in the critical values, as does
    scipy.stats.anderson_ksamp.
    """
    critical = _AD_B0 + _AD_B1 + _AD_B2  # m = k - 1 = 1 for two samples
    fit = np.polyfit(critical, np.log(_AD_LEVELS), 2)
    a2 = np.asarray(a2, dtype=float)
    p = np.exp(np.clip(np.polyval(fit, a2), -50.0, 0.0))  # outside the table: replaced below
    p = np.where(a2 < critical.min(), _AD_LEVELS.max(), p)
    p = np.where(a2 > critical.max(), _AD_LEVELS.min(), p)
    return np.where(np.isfinite(a2), p, np.nan)


def es_pvalues(w: np.ndarray, dof: np.ndarray) -> np.ndarray:
    """Epps–Singleton p-values: chi-squared survival function with the covariance's rank as dof."""
    w, dof = np.asarray(w, dtype=float), np.asarray(dof)
    out = np.full(w.shape, np.nan)
    ok = np.isfinite(w) & (dof > 0)
    out[ok] = stats.chi2.sf(w[ok], dof[ok])
    return out


def _ad_sigma(n_a, n_b):
    """Standard deviation of the two-sample A2 under the null (Scholz & Stephens 1987, eq. 4)."""
    n, k = n_a + n_b, 2
    h_sum = 1.0 / n_a + 1.0 / n_b
    partial = np.cumsum(1.0 / np.arange(n - 1, 1, -1))
    h = partial[-1] + 1.0
    g = float(np.sum(partial / np.arange(2, n)))
    a = (4 * g - 6) * (k - 1) + (10 - 6 * g) * h_sum
    b = (2 * g - 4) * k**2 + 8 * h * k + (2 * g - 14 * h - 4) * h_sum - 8 * h + 4 * g - 6
    c = (6 * h + 2 * g - 2) * k**2 + (4 * h - 4 * g + 6) * k + (2 * h - 6) * h_sum + 4 * h
    d = (2 * h + 6) * k**2 - 4 * h * k
    variance = (a * n**3 + b * n**2 + c * n + d) / ((n - 1.0) * (n - 2.0) * (n - 3.0))
    return float(np.sqrt(variance))


def _epps_singleton(a, b, pooled_sorted):
    """(W, rank) of the Epps–Singleton statistic; (nan, 0) when the pooled IQR is zero."""
    q25, q75 = _sorted_quantile(pooled_sorted, 0.25), _sorted_quantile(pooled_sorted, 0.75)
    sigma = (q75 - q25) / 2.0
    if not sigma > 0:
        return np.nan, 0
    t1 = ES_T[0] / sigma
    n_a, n_b = len(a), len(b)
    n = n_a + n_b
    means, covariances = [], []
    for values, size in ((a, n_a), (b, n_b)):
        features = _characteristic_features(values, t1)
        mean = features.mean(axis=1)
        means.append(mean)
        covariances.append((features @ features.T) / size - np.outer(mean, mean))
    estimate = (n / n_a) * covariances[0] + (n / n_b) * covariances[1]
    try:
        inverse = np.linalg.pinv(estimate)
    except np.linalg.LinAlgError:  # non-finite features (degenerate data)
        return np.nan, 0
    rank = int(np.linalg.matrix_rank(inverse))
    diff = means[0] - means[1]
    w = float(n * diff @ inverse @ diff)
    if max(n_a, n_b) < 25:
        w /= 1.0 + n**-0.45 + 10.1 * (n_a**-1.7 + n_b**-1.7)
    return w, rank


def _characteristic_features(values, t1):
    """cos(t x), cos(2t x), sin(t x), sin(2t x) as a (4, n) array (double-angle formulas)."""
    out = np.empty((4, len(values)))
    np.multiply(values, t1, out=out[1])
    np.cos(out[1], out=out[0])
    np.sin(out[1], out=out[2])
    np.multiply(out[2], out[0], out=out[3])
    out[3] *= 2.0
    np.multiply(out[0], out[0], out=out[1])
    out[1] *= 2.0
    out[1] -= 1.0
    return out


def _sorted_quantile(values, q):
    """Linear-interpolation quantile of a sorted array (numpy's default 'linear' method)."""
    position = q * (len(values) - 1)
    lo = int(np.floor(position))
    hi = min(lo + 1, len(values) - 1)
    return values[lo] + (position - lo) * (values[hi] - values[lo])
