"""Machinery shared by the null tests and the challenge (docs/method.md#null-tests): fitting any catalogue of
the data's kind like the data, the context every test receives, and the test statistics.

- `Fitter`: fits k to any catalogue of the data's kind (a subset, a permutation, a mock), with the
  selections of the samples present and a zero-point method that exists in it;
- `NullContext`: the data, its observed fit, the seeds and the threshold;
- statistics: `nested_pull` (Hausman 1978, Econometrica 46, 1251: for nested efficient estimators
  Var(k_sub - k_full) = σ_sub² - σ_full²), `bonferroni`, `monte_carlo_p`, `binomial_two_sided_p`;
- design facts: `redshift_confounding` (how strongly method and host type go with redshift).
"""

from dataclasses import dataclass, field, replace

import numpy as np
from scipy import stats

from ..errors import ConfigError
from ..inference.laplace import laplace
from ..inference.fit import FitData, build_model
from ..inference.k_estimate import CAMPAIGN_MAX_STEPS, MODES, estimate_k
from ..data.catalog import Catalog
from ..model.truth import Truth
from ..seeding import child_seed
from .significance import nuisances_at

#: Default significance level of every null test (a test fails when its p-value is below it).
#: Eight tests at 1 % each give a clean data set a ~8 % chance that one of them fails.
ALPHA = 0.01
#: Nominal level of the intervals whose false-positive rate the k = 0 test checks.
INTERVAL_LEVEL = 0.95
#: Floor of Var(k_sub - k_full) as a fraction of σ_sub²: a subset that is almost the whole data
#: has a tiny, noisily estimated difference variance.
MIN_DIFFERENCE_VARIANCE = 0.05
DEFAULT_REPEATS = 100
#: A label (mass method, host type) counts as confounded with redshift when it explains at least
#: this fraction of the variance of the lever arm log10(1 + z) (correlation ratio η²).
CONFOUNDING_ETA2 = 0.1


@dataclass(frozen=True, eq=False)
class Fitter:
    """Fits k to catalogues of the data's kind exactly like the data.

    Parameters
    ----------
    config : RunConfig, model, priors and sampler options of the run
    data : FitData, the data (selections per sample, cosmology)
    mode : "fast" (MAP + Laplace) or "mcmc"
    selection_aware : bool, model the declared selection (False: the plain likelihood)

    Calling it with a catalogue returns ``{"k", "k_std", "converged"}`` (`fit_model`).
    Samples absent from the catalogue lose their selection; a configured zero-point method or host
    type absent from it is replaced by the automatic choice. With `selection_catalog` (same rows, other
    redshifts or labels) the selection thresholds are computed from that catalogue instead.
    """

    config: object
    data: FitData
    mode: str = "fast"
    selection_aware: bool = True

    def __post_init__(self):
        if self.mode not in MODES:
            raise ConfigError(f"--mode: expected one of {', '.join(MODES)}, got {self.mode!r}")

    def _config_for(self, catalog):
        options = self.config.model
        if options.zero_point_method and options.zero_point_method not in catalog.method_names:
            options = replace(options, zero_point_method=None)
        if options.zero_point_host_type and options.zero_point_host_type not in catalog.host_type_names:
            options = replace(options, zero_point_host_type=None)
        return self.config if options is self.config.model else replace(self.config, model=options)

    def _selections_for(self, catalog):
        present = set(catalog.sample_names)
        return {name: spec for name, spec in self.data.selections.items() if spec and name in present}

    def model(self, catalog: Catalog, selection_catalog: Catalog | None = None):
        """The run's posterior for `catalog` (`fit.build_model`); with `selection_catalog` (the same
        rows with their original redshifts and labels) the selection thresholds come from it."""
        config = self._config_for(catalog)
        source = catalog if selection_catalog is None else selection_catalog
        data = FitData(catalog=catalog, files=[], selections=self._selections_for(source),
                       cosmology=self.data.cosmology)
        if selection_catalog is None:
            return build_model(config, data, selection_aware=self.selection_aware, catalog=catalog)
        return _model_with_selection_of(config, data, catalog, source, self.selection_aware)

    def __call__(self, catalog, *, seed=None, selection_catalog=None):
        return fit_model(self.config, self.model(catalog, selection_catalog), self.mode, seed)


def _model_with_selection_of(config, data, catalog, source, selection_aware):
    """`fit.build_model` for `catalog` with the selection compiled on `source` (same rows)."""
    return build_model(config, data, selection_aware=selection_aware, catalog=catalog, selection_source=source)


def fit_model(config, model, mode: str = "fast", seed=None) -> dict:
    """k of a prebuilt model (`inference.k_estimate.estimate_k`): {"k", "k_std", "converged"}."""
    out = estimate_k(model, mode=mode, sampler=config.sampler, seed=seed, max_steps=CAMPAIGN_MAX_STEPS)
    return {"k": float(out.k), "k_std": float(out.k_std), "converged": bool(out.converged)}


@dataclass(frozen=True, eq=False)
class NullContext:
    """What every null test needs.

    Attributes
    ----------
    config, data : the run configuration and its data (FitData)
    fitter : callable(catalog, *, seed=None, selection_catalog=None) -> {"k", "k_std", "converged"}
    observed : dict, the fitter's result on the data
    seed : int, root of the per-test, per-repeat seeds (`child_seed(seed, test, repeat)`)
    repeats : int, permutations, splits and k = 0 mocks per test
    alpha : float, significance level of every test
    cache : dict, results shared between tests (e.g. the k = 0 mocks' fits)
    """

    config: object
    data: FitData
    fitter: object
    observed: dict
    seed: int
    repeats: int = DEFAULT_REPEATS
    alpha: float = ALPHA
    cache: dict = field(default_factory=dict)

    def null_truth(self, k=0.0):
        """Truth table of the data's design at coupling `k` (see `truth_at`)."""
        return truth_at(self.config, self.data, k)

    def null_nuisances(self, k=0.0):
        """Truth table at coupling `k` and its offsets against their priors (see `truth_at`)."""
        return truth_at(self.config, self.data, k, offsets=True)


def truth_at(config, data: FitData, k: float, offsets: bool = False) -> Truth | tuple:
    """Truth table of the data's design at coupling `k`: the nuisance parameters maximise the
    posterior of the run's model (selection-aware when a selection is declared) with k held fixed.
    With `offsets`, also the offsets' values, prior widths and pulls (`significance.offset_nuisances`).

    Raises ConfigError when k lies outside the prior range of k.
    """
    model = Fitter(config, data).model(data.catalog)
    truth, table = nuisances_at(model, laplace(model).theta, k)
    return (truth, table) if offsets else truth


def make_context(config, data, *, mode="fast", seed=0, repeats=DEFAULT_REPEATS, alpha=ALPHA,
                 fitter=None):
    """A NullContext with the data fitted once; `fitter` defaults to the run's own (`Fitter`)."""
    if not (isinstance(repeats, (int, np.integer)) and repeats >= 1):
        raise ConfigError(f"--repeats: expected an integer >= 1, got {repeats!r}")
    if not 0 < alpha < 0.5:
        raise ConfigError(f"--alpha: expected 0 < alpha < 0.5, got {alpha!r}")
    fitter = fitter or Fitter(config, data, mode=mode)
    observed = fitter(data.catalog, seed=child_seed(seed, 0, 0))
    return NullContext(config=config, data=data, fitter=fitter, observed=observed, seed=int(seed),
                       repeats=int(repeats), alpha=float(alpha))


# ----- statistics --------------------------------------------------------------------------------
def nested_pull(sub, full, floor=True):
    """(k_sub - k_full) / sqrt(σ_sub² - σ_full²): the pull of a subset's k against the full data's.

    For nested, efficient estimators the difference is independent of the full estimate, so its
    variance is the difference of the variances (Hausman 1978, Econometrica 46, 1251). The variance
    is floored at MIN_DIFFERENCE_VARIANCE σ_sub² (`floor=False`: not floored; ±inf when the
    difference of the variances is not positive).
    """
    var = sub["k_std"] ** 2 - full["k_std"] ** 2
    if floor:
        var = max(var, MIN_DIFFERENCE_VARIANCE * sub["k_std"] ** 2)
    difference = sub["k"] - full["k"]
    if var <= 0:
        return float(np.copysign(np.inf, difference)) if difference else 0.0
    return float(difference / np.sqrt(var))


def two_sided_p(pull):
    """Two-sided Gaussian p-value of a pull."""
    return float(2.0 * stats.norm.sf(abs(pull)))


def bonferroni(p_values):
    """min(1, n min p): a conservative combination of n correlated p-values."""
    p_values = np.asarray(p_values, dtype=float)
    return float(min(1.0, len(p_values) * np.min(p_values))) if p_values.size else 1.0


def monte_carlo_p(observed, draws):
    """(1 + #{draws >= observed}) / (1 + n): the Monte Carlo p-value of a statistic whose large
    values speak against the null (exact for exchangeable draws)."""
    draws = np.asarray(draws, dtype=float)
    draws = draws[np.isfinite(draws)]
    return float((1 + np.sum(draws >= observed)) / (1 + draws.size))


def two_sided_mc_p(observed, draws):
    """Two-sided Monte Carlo p-value from both tails of the draws' distribution."""
    draws = np.asarray(draws, dtype=float)
    draws = draws[np.isfinite(draws)]
    n = draws.size
    tail = min(1 + np.sum(draws <= observed), 1 + np.sum(draws >= observed))
    return float(min(1.0, 2.0 * tail / (n + 1)))


def predictive_p(observed, draws):
    """Two-sided p-value of `observed` as one more draw from the Gaussian the draws come from.

    (x - mean) / (s sqrt(1 + 1/n)) follows Student's t with n - 1 degrees of freedom when the n
    draws and x are independent Gaussian draws (the prediction interval of a normal sample), so
    the p-value is not limited to 1/(n + 1) as a Monte Carlo one is. NaN for fewer than 3 draws.
    """
    draws = np.asarray(draws, dtype=float)
    draws = draws[np.isfinite(draws)]
    n = draws.size
    if n < 3:
        return float("nan")
    scale = np.std(draws, ddof=1) * np.sqrt(1.0 + 1.0 / n)
    if scale <= 0:
        return 1.0 if observed == draws[0] else 0.0
    return float(2.0 * stats.t.sf(abs(observed - np.mean(draws)) / scale, n - 1))


def binomial_two_sided_p(successes, trials, rate):
    """Two-sided mid-p value of `successes` for X ~ Binomial(trials, rate): small when there are too
    many successes and when there are too few.

    p = 2 min(P(X < x) + P(X = x)/2, P(X > x) + P(X = x)/2), at most 1. The mid-p value (Lancaster
    1961, JASA 56, 223) halves the probability of the observed count, so its false-alarm rate stays
    close to the nominal one although X is discrete; e.g. 0 of 100 at rate 0.05 gives p = 0.0059.
    """
    if trials == 0:
        return 1.0
    half = 0.5 * stats.binom.pmf(successes, trials, rate)
    lower = stats.binom.cdf(successes - 1, trials, rate) + half
    upper = stats.binom.sf(successes, trials, rate) + half
    return float(min(1.0, 2.0 * min(lower, upper)))


def redshift_confounding(catalog):
    """How strongly each label with two or more groups goes with redshift.

    Returns
    -------
    dict {"method" / "host_type": η²}: the fraction of the variance of log10(1 + z) explained by
    the label's groups (the correlation ratio; 1 when every group sits at its own redshift).
    Labels with a single group are left out.
    """
    x = np.log10(1.0 + np.asarray(catalog.z, dtype=float))
    total = np.sum((x - x.mean()) ** 2)
    out = {}
    for name in ("method", "host_type"):
        labels = getattr(catalog, name)
        groups = list(dict.fromkeys(labels.tolist()))
        if len(groups) < 2:
            continue
        between = sum(np.sum(labels == g) * (x[labels == g].mean() - x.mean()) ** 2 for g in groups)
        out[name] = float(between / total) if total > 0 else 1.0
    return out


def confounded_labels(catalog):
    """Labels whose groups differ in redshift enough to mimic a coupling (η² >= CONFOUNDING_ETA2)."""
    return [name for name, eta2 in redshift_confounding(catalog).items() if eta2 >= CONFOUNDING_ETA2]


def make_result(name, title, *, null_hypothesis, statistic, value, p_value, threshold, passed,
                note, details=None, interval=None, skipped=None):
    """One test's entry of nulltests.json."""
    return {"name": name, "title": title, "null_hypothesis": null_hypothesis, "statistic": statistic,
            "value": value, "p_value": p_value, "interval": interval, "threshold": threshold,
            "passed": passed, "skipped": skipped, "note": " ".join(note.split()),
            "details": details or {}}


def skipped_result(name, title, null_hypothesis, statistic, reason, details=None):
    """A test that cannot fail for its stated reason on these data: passed = None, with the reason."""
    return make_result(name, title, null_hypothesis=null_hypothesis, statistic=statistic, value=None,
                       p_value=None, threshold=None, passed=None, note=f"Not applicable: {reason}.",
                       skipped=reason, details=details)


# ----- the suite ---------------------------------------------------------------------------------
