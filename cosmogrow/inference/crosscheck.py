"""The assumption-light cross-check of k (docs/method.md#estimators): distribution matching on a grid of k.

For each k on a grid, every object is projected to the reference epoch, ``t_i + (k - b gamma) x_i``
with ``x_i = log10[(1+z_i)/(1+z_ref)]`` (b = 1 for the "ratio" statistic), and the projected
statistic of the higher-redshift samples is compared with the reference sample's by three
two-sample tests: Kolmogorov–Smirnov, Anderson–Darling (two-sample midrank form) and Epps–Singleton
(the test used by Farrah et al. 2023, ApJL 944, L31). They are computed on one sort per comparison,
O(N log N) (twosample module; the statistics equal scipy.stats' to rounding); the KS p-value is exact
for small samples and asymptotic above n_a n_b = 40,000. The high-z samples are compared pooled
(the headline numbers) and one by one.

The statistic t is either "ratio", log(M_BH/M_*), or "residual", log M_BH minus the reference
sample's least-squares line in log M_*. No Gaussian shape, selection or mass-method offset is
assumed or modelled: a disagreement with the posterior is worth a warning, not a verdict.

Per test we report the best k (the grid point of the smallest test statistic, i.e. the largest
p-value at fixed sample sizes; the centre of a tied run for the step-wise KS distance) and the range
of k with p >= 0.05 (its envelope; `contiguous` says whether it has holes). The Anderson–Darling
p-value is tabulated only within [0.001, 0.25] and capped there; the range is unaffected since 0.05
lies inside.
"""

import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np

from ..errors import ConfigError
from ..model.likelihood import lever_arm
from .twosample import PairComparison, ad_pvalues, es_pvalues

TESTS = ("ks", "anderson_darling", "epps_singleton")
STATISTICS = ("ratio", "residual")
#: p-value above which a k is "consistent" (docs/method.md#estimators).
P_THRESHOLD = 0.05
#: Epps–Singleton needs a few objects per sample for its characteristic-function covariance
#: (scipy refuses fewer than 5); below this it is skipped.
MIN_OBJECTS_ES = 8
#: Any test needs at least this many objects per sample.
MIN_OBJECTS = 3
MAX_GRID = 20001
#: From this many objects in a comparison, grid points are compared in two threads.
THREADED_MIN_OBJECTS = 50_000
_KEYS = ("reference", "k_min", "k_max", "k_step", "statistic")


@dataclass(frozen=True)
class CrosscheckOptions:
    """The `[crosscheck]` table of a run configuration.

    reference : str or None, name of the reference sample (None: lowest median redshift)
    k_min, k_max, k_step : float, the grid of k (dimensionless)
    statistic : "ratio" (log M_BH/M_*) or "residual" (about the reference sample's line)
    """

    reference: str | None = None
    k_min: float = -2.0
    k_max: float = 6.0
    k_step: float = 0.05
    statistic: str = "ratio"

    @property
    def grid(self):
        n = int(np.floor((self.k_max - self.k_min) / self.k_step + 1e-9)) + 1
        return np.round(self.k_min + self.k_step * np.arange(n), 10)


def crosscheck_options(table, source="<config>"):
    """Validate a `[crosscheck]` table (a dict; {} gives the defaults).

    Raises
    ------
    ConfigError
        Unknown key, a non-numeric or inverted grid, a grid of more than MAX_GRID points, or an
        unknown statistic.
    """
    if not isinstance(table, dict):
        raise ConfigError(f"{source}: crosscheck: expected a table, got {table!r}")
    unknown = sorted(set(table) - set(_KEYS))
    if unknown:
        raise ConfigError(f"{source}: unknown key 'crosscheck.{unknown[0]}'; expected one of "
                          f"{', '.join(_KEYS)}")
    for key in ("k_min", "k_max", "k_step"):
        value = table.get(key, 0.0)
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not np.isfinite(value):
            raise ConfigError(f"{source}: crosscheck.{key}: expected a number, got {value!r}")
    options = CrosscheckOptions(**{key: table[key] for key in _KEYS if key in table})
    if options.reference is not None and not isinstance(options.reference, str):
        raise ConfigError(f"{source}: crosscheck.reference: expected a sample name, got "
                          f"{options.reference!r}")
    if options.statistic not in STATISTICS:
        raise ConfigError(f"{source}: crosscheck.statistic: expected one of {', '.join(STATISTICS)}, "
                          f"got {options.statistic!r}")
    if not options.k_min < options.k_max:
        raise ConfigError(f"{source}: crosscheck: expected k_min < k_max, got {options.k_min!r} "
                          f">= {options.k_max!r}")
    if options.k_step <= 0:
        raise ConfigError(f"{source}: crosscheck.k_step: expected > 0, got {options.k_step!r}")
    if len(options.grid) > MAX_GRID:
        raise ConfigError(f"{source}: crosscheck: the grid has {len(options.grid)} points; expected "
                          f"at most {MAX_GRID} (raise k_step)")
    return options


def choose_reference(catalog, requested=None, source="<config>"):
    """The reference sample: the requested name, else the lowest median redshift."""
    names = catalog.sample_names
    if requested is not None:
        if requested not in names:
            raise ConfigError(f"{source}: crosscheck.reference: {requested!r} is not a sample of the "
                              f"data; expected one of {', '.join(names)}")
        return requested
    medians = {name: float(np.median(catalog.z[catalog.sample == name])) for name in names}
    return min(medians, key=medians.get)


def run_crosscheck(config, catalog):
    """The cross-check of a run: its `[crosscheck]` table and model options applied to `catalog`."""
    options = crosscheck_options(config.raw.get("crosscheck", {}), config.source)
    model = config.model
    return distribution_crosscheck(catalog, options, z_ref=model.z_ref, host_growth=model.host_growth,
                                   log_mstar_pivot=model.log_mstar_pivot, source=config.source)


def distribution_crosscheck(catalog, options=None, *, z_ref=0.0, host_growth=0.0,
                            log_mstar_pivot=11.0, source="<config>"):
    """Scan k and compare the projected high-z samples with the reference sample.

    Parameters
    ----------
    catalog : Catalog
    options : CrosscheckOptions, optional
    z_ref : float, reference redshift of the projection
    host_growth : float, gamma (host mass grows as s + gamma x): the shift is (k - b gamma) x
    log_mstar_pivot : float, log10 Msun, pivot of the "residual" line

    Returns
    -------
    dict with reference, statistic, tests {name: {best_k, range, p_best, ...}} (pooled high-z
    samples), per_sample {sample: tests}, grid {k, p: {test: [...]}, per_sample: {...}} and, when
    the cross-check cannot run, skipped (the reason) with empty tests.
    """
    options = options or CrosscheckOptions()
    reference = choose_reference(catalog, options.reference, source)
    others = [name for name in catalog.sample_names if name != reference]
    base = {"reference": reference, "statistic": options.statistic, "p_threshold": P_THRESHOLD,
            "high_z_samples": others, "tests": {}, "per_sample": {}, "grid": {}}
    if not others:
        return {**base, "skipped": f"only one sample ('{reference}'): there is nothing to compare "
                                   "the reference sample with"}
    values, slope = _statistic(catalog, reference, options.statistic, log_mstar_pivot)
    x = lever_arm(catalog.z, z_ref)
    is_ref = catalog.sample == reference
    small = [name for name in catalog.sample_names if np.sum(catalog.sample == name) < MIN_OBJECTS]
    if small:
        return {**base, "skipped": f"sample '{small[0]}' has fewer than {MIN_OBJECTS} objects"}
    grid = options.grid
    shift = grid - slope * host_growth
    comparisons = {"pooled": ~is_ref}
    if len(others) > 1:
        comparisons.update({name: catalog.sample == name for name in others})
    scans = {label: _scan(values[is_ref], x[is_ref], values[rows], x[rows], shift)
             for label, rows in comparisons.items()}
    pooled = scans["pooled"]
    per_sample = scans if len(others) > 1 else {others[0]: pooled}
    per_sample = {name: scan for name, scan in per_sample.items() if name != "pooled"}
    return {**base,
            "tests": _summaries(grid, pooled),
            "per_sample": {name: _summaries(grid, scan) for name, scan in per_sample.items()},
            "grid": {"k": grid, "p": {test: pooled[test][1] for test in TESTS},
                     "per_sample": {name: {test: scan[test][1] for test in TESTS}
                                    for name, scan in per_sample.items()}}}


def _statistic(catalog, reference, statistic, pivot):
    """Per-object statistic (log10) and its slope b in log M* (1 for the ratio)."""
    m, s = np.asarray(catalog.log_mbh, dtype=float), np.asarray(catalog.log_mstar, dtype=float)
    if statistic == "ratio":
        return m - s, 1.0
    ref = catalog.sample == reference
    slope, intercept = np.polyfit(s[ref] - pivot, m[ref], 1)
    return m - intercept - slope * (s - pivot), float(slope)


def _scan(ref_values, ref_x, values, x, shifts):
    """{test: (statistic array, p array)} over the shifts; NaN where a test cannot run.

    One merged sort per shift gives all three statistics (twosample module); p-values are computed
    for the whole grid at once. Large samples use two threads.
    """
    n_ref, n_other = len(ref_values), len(values)
    pair = PairComparison(n_ref, n_other)
    with_es = min(n_ref, n_other) >= MIN_OBJECTS_ES

    def compare(shift):
        return pair.statistics(ref_values + shift * ref_x, values + shift * x, with_es)

    if n_ref + n_other >= THREADED_MIN_OBJECTS and len(os.sched_getaffinity(0)) > 1:
        # sorting and the ufuncs release the GIL: grid points in two threads halve the wall time
        with ThreadPoolExecutor(max_workers=2) as pool:
            rows = list(pool.map(compare, shifts))
    else:
        rows = [compare(shift) for shift in shifts]
    rows = np.array(rows, dtype=float).reshape(len(shifts), 4)
    exact_data = ((ref_values + shift * ref_x, values + shift * x) for shift in shifts)
    out = {"ks": (rows[:, 0], pair.ks_pvalues(rows[:, 0], exact_data)),
           "anderson_darling": (rows[:, 1], ad_pvalues(rows[:, 1])),
           "epps_singleton": (rows[:, 2], es_pvalues(rows[:, 2], rows[:, 3].astype(int)))}
    out["_n"] = (n_ref, n_other)
    return out


def _summaries(grid, scan):
    n_ref, n_other = scan["_n"]
    out = {}
    for test in TESTS:
        statistic, pvalue = scan[test]
        if not np.any(np.isfinite(pvalue)):
            reason = ("a sample has fewer than "
                      f"{MIN_OBJECTS_ES} objects ({n_ref} reference, {n_other} compared)"
                      if test == "epps_singleton" and min(n_ref, n_other) < MIN_OBJECTS_ES
                      else "the test failed at every k (degenerate data)")
            out[test] = {"best_k": None, "range": None, "p_best": None, "skipped": reason}
            continue
        out[test] = summarise_scan(grid, statistic, pvalue)
    return out


def summarise_scan(grid, statistic, pvalue, threshold=P_THRESHOLD):
    """Best k and the range where p >= threshold of one scan.

    The best k minimises the test statistic (ties: centre of the first tied run), which is the
    maximum p at fixed sample sizes and is not blurred by capped p-values.
    """
    grid = np.asarray(grid, dtype=float)
    finite = np.isfinite(statistic)
    stat = np.where(finite, statistic, np.inf)
    best = float(np.min(stat))
    tied = np.flatnonzero(np.isclose(stat, best, rtol=1e-12, atol=1e-12))
    run_end = tied[0]
    while run_end + 1 < len(stat) and np.isclose(stat[run_end + 1], best, rtol=1e-12, atol=1e-12):
        run_end += 1
    i_best = (tied[0] + run_end) // 2
    ok = np.flatnonzero(np.nan_to_num(pvalue, nan=-1.0) >= threshold)
    if ok.size:
        rng = [float(grid[ok[0]]), float(grid[ok[-1]])]
        contiguous = bool(ok[-1] - ok[0] + 1 == ok.size)
        open_ends = bool(ok[0] == 0 or ok[-1] == len(grid) - 1)
    else:
        rng, contiguous, open_ends = None, None, None
    return {"best_k": float(grid[i_best]), "range": rng, "p_best": float(pvalue[i_best]),
            "statistic_best": best, "contiguous": contiguous, "range_reaches_grid_edge": open_ends}


def crosscheck_warnings(crosscheck, k_summary):
    """Warnings where the cross-check disagrees with the posterior of k.

    Parameters
    ----------
    crosscheck : dict from `distribution_crosscheck`
    k_summary : dict with "median" and "interval95" of the posterior of k

    Returns
    -------
    list of str (empty when every test's range holds the posterior median and meets the 95 %
    interval).
    """
    if not crosscheck or crosscheck.get("skipped"):
        return []
    median = float(k_summary["median"])
    lo95, hi95 = (float(v) for v in k_summary["interval95"])
    disjoint, outside = [], []
    for test, row in crosscheck["tests"].items():
        if row.get("skipped"):
            continue
        rng = row["range"]
        label = _LABELS[test]
        if rng is None:
            disjoint.append(f"{label} (no k with p >= {P_THRESHOLD:g})")
        elif rng[1] < lo95 or rng[0] > hi95:
            disjoint.append(f"{label} [{rng[0]:.2f}, {rng[1]:.2f}]")
        elif not rng[0] <= median <= rng[1]:
            outside.append(f"{label} [{rng[0]:.2f}, {rng[1]:.2f}]")
    out = []
    tail = ("The cross-check assumes no Gaussian scatter but also models neither selection nor "
            "mass-method offsets; a disagreement points to non-Gaussian or sample-dependent scatter, "
            "outliers, or one of those effects.")
    if disjoint:
        out.append(f"distribution-matching cross-check disagrees with the posterior: the range of k "
                   f"with p >= {P_THRESHOLD:g} from {', '.join(disjoint)} does not meet the posterior "
                   f"95 % interval [{lo95:.2f}, {hi95:.2f}]. {tail}")
    if outside:
        out.append(f"distribution-matching cross-check: the posterior median k = {median:.2f} lies "
                   f"outside the range of k with p >= {P_THRESHOLD:g} from {', '.join(outside)}. {tail}")
    return out


_LABELS = {"ks": "Kolmogorov–Smirnov", "anderson_darling": "Anderson–Darling",
           "epps_singleton": "Epps–Singleton"}
