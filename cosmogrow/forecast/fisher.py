"""Expected Fisher information of the fit's own likelihood for a plan (docs/method.md#forecast).

F = Σ_samples n_s I_s + P, where I_s is the expected information per object of sample s and P the
precision of the Gaussian (nuisance) priors. I_s is an average over the selected population: a
large Monte Carlo population of the plan (`mc_objects` selected objects per sample, drawn by the
project's simulator at the plan's truth, or a kept catalogue's design with masses redrawn) is
fitted by the same model a fit builds (`inference.fit.build_model`: selection, calibrated hosts,
parent host priors), and minus the Hessian of each sample's summed per-object log likelihood at
the population's maximum-likelihood point, divided by its number of objects, is I_s. The Hessian is
a central finite difference with steps of 0.2 posterior standard deviations of the population.
Uniform prior ranges carry no information; the forecast width is sigma_k = sqrt((F^-1)_kk).
Parameters without information (those of a sample left out of a scan) are dropped before the
inversion.
"""

from dataclasses import dataclass

import numpy as np
from scipy import stats

from ..data.catalog import Catalog
from ..inference.fit import FitData, build_model
from ..inference.laplace import find_map, hessian
from ..seeding import child_seed
from ..simulation.population import simulate_population
from ..simulation.resample import resample_hosts

#: Below this fraction of the largest diagonal entry a parameter counts as uninformed.
_UNINFORMED = 1e-12


@dataclass(frozen=True, eq=False)
class Information:
    """Per-object expected information of every sample of a Monte Carlo population.

    Attributes
    ----------
    names : tuple of str, parameter names of the model (k first)
    theta : ndarray, the point the information is evaluated at
    per_object : dict, sample name -> (ndim, ndim) expected information per object
    prior : ndarray (ndim, ndim), precision of the Gaussian priors
    offsets : ndarray of bool, which parameters carry a Gaussian (offset) prior
    mc_sizes : dict, sample name -> objects in the Monte Carlo population
    """

    names: tuple
    theta: np.ndarray
    per_object: dict
    prior: np.ndarray
    offsets: np.ndarray
    mc_sizes: dict

    def fisher(self, sizes, offset_width=None, offset_scale=1.0):
        """F = Σ n_s I_s + P for `sizes` ({sample: n}; samples not given count 0).

        `offset_width` (dex; np.inf for none) replaces the width of every offset prior;
        `offset_scale` multiplies every width (np.inf: no offset prior).
        """
        total = np.zeros_like(self.prior)
        for name, n in sizes.items():
            total = total + float(n) * self.per_object[name]
        prior = self.prior.copy()
        if offset_width is not None:
            index = np.flatnonzero(self.offsets)
            prior[index, index] = 0.0 if np.isinf(offset_width) else 1.0 / offset_width**2
        return total + prior / offset_scale**2

    def sigma_k(self, sizes, offset_width=None, offset_scale=1.0):
        """Forecast standard deviation of k, sqrt((F^-1)_kk); inf when k is not informed."""
        return sigma_of(self.fisher(sizes, offset_width, offset_scale), 0)


def sigma_of(matrix, index):
    """sqrt((F^-1)_ii) after dropping uninformed parameters; inf when F is singular there."""
    diag = np.diag(matrix)
    keep = diag > _UNINFORMED * max(float(diag.max()), 1e-300)
    if not keep[index]:
        return float("inf")
    sub = matrix[np.ix_(keep, keep)]
    position = int(np.sum(keep[:index]))
    eigen = np.linalg.eigvalsh(sub)
    if eigen.min() <= 1e-10 * eigen.max():
        return float("inf")
    return float(np.sqrt(np.linalg.inv(sub)[position, position]))


def exclusion_power(k_true, k_null, sigma_k, threshold):
    """Probability that a measurement of width sigma_k excludes k_null at `threshold` sigma when the
    truth is k_true: Φ(|k_true - k_null| / sigma_k - threshold) (Gaussian estimator, one-sided)."""
    if not np.isfinite(sigma_k) or sigma_k <= 0:
        return 0.0
    return float(stats.norm.cdf(abs(k_true - k_null) / sigma_k - threshold))


def population(plan, extra_tables=(), seed=0, mc_objects=None):
    """A large Monte Carlo population of the plan: every sample with `mc_objects` selected objects.

    Simulated samples (and `extra_tables`, e.g. the degeneracy breaker) are drawn by the simulator
    at the plan's truth; a kept catalogue is repeated (its design: redshifts, hosts, errors) with
    its masses redrawn from the truth until it holds about `mc_objects` rows.

    Returns
    -------
    data.catalog.Catalog
    """
    mc_objects = int(mc_objects or plan.mc_objects)
    tables = [dict(t) for t in plan.sim_raw["sample"]] + [dict(t) for t in extra_tables]
    parts = []
    if tables:
        for table in tables:
            table["n"] = mc_objects
        raw = {**plan.sim_raw, "truth": truth_for(plan, tables), "sample": tables}
        parts.append(simulate_population(raw, seed=child_seed(seed, 0)).catalog)
    truth = plan.truth.to_dict()
    for i, kept in enumerate(plan.kept):
        copies = max(1, int(np.ceil(mc_objects / kept.n)))
        for j in range(copies):
            redrawn = resample_hosts(kept.catalog, truth, {kept.name: list(kept.selection)}, plan.cosmology,
                                     seed=child_seed(seed, 1 + i, j),
                                     host_errors=plan.run_config.model.host_errors)
            ids = np.array([f"{kept.name}-mc{j}-{r}" for r in range(kept.n)], dtype=object)
            parts.append(redrawn.replace(ids=ids))
    return Catalog.concat(parts)


def truth_for(plan, tables):
    """The plan's truth as a table, with a per-sample scatter extended to samples it does not name
    (they get the scatter of the local sample)."""
    truth = plan.truth.to_dict()
    if isinstance(truth["sigma_int"], dict):
        fallback = truth["sigma_int"].get(plan.local, next(iter(truth["sigma_int"].values())))
        truth["sigma_int"] = {t["name"]: truth["sigma_int"].get(t["name"], fallback) for t in tables}
    return truth


def expected_information(plan, catalog):
    """Per-object expected information of every sample of a Monte Carlo population.

    Parameters
    ----------
    plan : forecast.plan.ForecastPlan
    catalog : data.catalog.Catalog, from `population`

    Returns
    -------
    Information
    """
    selections = plan.selections()
    selections.update({name: [] for name in catalog.sample_names if name not in selections})
    data = FitData(catalog=catalog, files=[], selections=selections, cosmology=plan.cosmology)
    model = build_model(plan.run_config, data, catalog=catalog)
    theta, _, _ = find_map(model)
    rows = {name: catalog.sample == name for name in catalog.sample_names}
    cache = _PerObjectCache(model)
    scale = 1e-3 * np.maximum(np.abs(theta), 0.1)
    for _ in range(2):  # second pass: steps of 0.2 standard deviations of the whole population
        total = -hessian(_SummedLikelihood(cache, None), theta, scale)
        spread = np.sqrt(np.clip(np.diag(np.linalg.pinv(total + _prior_precision(model, theta))),
                                 1e-12, None))
        scale = 0.2 * spread
    per_object = {name: -hessian(_SummedLikelihood(cache, mask), theta, scale) / mask.sum()
                  for name, mask in rows.items()}
    prior = _prior_precision(model, theta)
    return Information(names=tuple(model.names), theta=theta, per_object=per_object, prior=prior,
                       offsets=np.diag(prior) > 0,
                       mc_sizes={name: int(mask.sum()) for name, mask in rows.items()})


def _prior_precision(model, theta):
    """Minus the Hessian of the log prior (exact: the prior is Gaussian or flat)."""
    return -hessian(_Prior(model), theta, np.full(len(theta), 1e-2))


class _PerObjectCache:
    """Per-object log likelihoods of a model, remembered per parameter vector."""

    def __init__(self, model):
        self.model = model
        self.lower, self.upper = model.lower, model.upper
        self._values = {}

    def __call__(self, theta):
        key = np.asarray(theta, dtype=float).tobytes()
        if key not in self._values:
            self._values[key] = self.model.per_object_log_likelihood(theta)
        return self._values[key]


class _SummedLikelihood:
    """log_prob-like view (what `laplace.hessian` differentiates): the log likelihood summed over
    the rows of `mask` (all rows when None)."""

    def __init__(self, cache, mask):
        self.cache, self.mask = cache, mask
        self.lower, self.upper = cache.lower, cache.upper

    def log_prob(self, points):
        values = [self.cache(point) for point in np.atleast_2d(points)]
        return np.array([v.sum() if self.mask is None else v[self.mask].sum() for v in values])


class _Prior:
    def __init__(self, model):
        self.log_prob = model.log_prior
        self.lower, self.upper = model.lower, model.upper
