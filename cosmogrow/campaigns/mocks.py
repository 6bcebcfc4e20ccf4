"""Replicas of a design: mocks simulated like the data and fitted exactly like the data.

Shared by injection-recovery campaigns (`cosmogrow.campaigns.runner`) and the null tests / challenge of a
claimed k. Three verbs:

- `design_truth`: the `Truth` of a design (a fit's MAP with k replaced);
- `draw_replica` / `draw_simulated`: one mock catalogue of the data's own design (resample-hosts
  mode, the data's selections and cosmology) or of a simulator configuration;
- `fit_replica`: the fit of one mock, fast (MAP + Laplace) or by MCMC, reduced to the facts about k.

Nothing here loops over replicas, prints or writes files.
"""

import numpy as np

from ..simulation import population as simulate
from ..simulation.resample import resample_hosts
from ..config import load_toml
from ..errors import ConfigError
from ..inference.fit import FitData, build_model
from ..inference.k_estimate import CAMPAIGN_MAX_STEPS, CAMPAIGN_MODES, estimate_k
from ..outputs import sha256_file
from ..data.catalog import Catalog
from ..model.truth import Truth


def design_truth(model, theta_map, k: float) -> Truth:
    """Truth table of a design: the fitted parameters at `theta_map` with k replaced.

    Parameters
    ----------
    model : model.CoupledGrowthModel, the fitted model (gives names and fixed options)
    theta_map : array_like, shape (model.ndim,), e.g. the MAP of the data
    k : float, injected coupling exponent

    Returns
    -------
    Truth: k, alpha, beta, sigma_int (per sample when the scatter is), delta and delta_host (the
    zero points at 0), gamma, s_pivot, z_ref, f_out / sigma_out (0 / 1 without outliers) and the
    model's parent host priors.
    """
    layout = model.layout
    theta = np.asarray(theta_map, dtype=float)
    values = layout.to_dict(theta)
    scatter = layout.scatter_by_name(theta)
    outliers = {"f_out": values["f_out"], "sigma_out": values["sigma_out"]} if model.options.outliers else {}
    return Truth(k=float(k), alpha=values["alpha"], beta=values.get("beta", 1.0),
                 sigma_int=scatter if len(scatter) > 1 else next(iter(scatter.values())),
                 delta=layout.offsets_by_label(theta, "method"),
                 delta_host=layout.offsets_by_label(theta, "host_type"), gamma=float(model.gamma),
                 s_pivot=float(model.options.log_mstar_pivot), z_ref=float(model.options.z_ref),
                 host_priors=model.host_priors or None, **outliers)


def draw_replica(config, data: FitData, truth: Truth, seed) -> Catalog:
    """One mock of the data's own design: hosts, redshifts, methods and errors kept, masses redrawn.

    Parameters
    ----------
    config : config.RunConfig of the data; its model.host_errors says how the true hosts behind
        the observed ones are drawn (as the fit's likelihood assumes them)
    data : fit.FitData, the real data (catalogue, selections per sample, cosmology)
    truth : Truth (see `design_truth`)
    seed : int or SeedSequence

    Returns
    -------
    catalog.Catalog
    """
    return resample_hosts(data.catalog, truth, data.selections, data.cosmology, seed=seed,
                          host_errors=config.model.host_errors)


def draw_simulated(simulator: simulate.Simulator, truth: Truth, seed) -> Catalog:
    """One mock of a simulator configuration with its truth replaced by `truth`.

    Parameters
    ----------
    simulator : simulation.population.Simulator, the configuration with its samplers built
    truth : Truth to simulate (e.g. the configuration's with k replaced)
    seed : int or SeedSequence

    Returns
    -------
    catalog.Catalog
    """
    return simulator.simulate(seed=seed, truth=truth).catalog


def simulation_design(path) -> tuple:
    """A simulator configuration file as a design: (Simulator, FitData, Truth).

    The FitData has no rows (``catalog=None``): only the samples' selections and the cosmology,
    which is what fitting a mock needs. Raises ConfigError for a bad configuration.
    """
    simulator = simulate.Simulator(load_toml(path))
    parsed = simulator.config
    selections = {spec.name: list(spec.selection) for spec in parsed.samples}
    data = FitData(catalog=None, files=[{"path": str(path), "sha256": sha256_file(path)}],
                   selections=selections, cosmology=parsed.cosmology)
    return simulator, data, parsed.truth


def replica_data(data: FitData, catalog: Catalog) -> FitData:
    """FitData of a mock: the mock's rows with the design's selections and cosmology."""
    return FitData(catalog=catalog, files=[], selections=data.selections, cosmology=data.cosmology)


def fit_replica(config, data: FitData, catalog: Catalog, *, mode: str = "fast", selection_aware: bool = True,
                seed=None, max_steps: int = CAMPAIGN_MAX_STEPS, n_draws: int = 0) -> dict:
    """Fit one mock exactly like the data and reduce the result to k.

    Parameters
    ----------
    config : config.RunConfig, the run's model, priors and sampler options
    data : fit.FitData, the design (its selections and cosmology are used; its rows are not)
    catalog : catalog.Catalog, the mock
    mode : "fast" (MAP + Laplace), "importance" (MAP + Laplace importance-sampled to the exact
        posterior when a selection is modelled, a short chain when that fails: see
        `inference.k_estimate.estimate_k`) or "mcmc" (emcee ensemble as in `cosmogrow fit`)
    selection_aware : bool, model the declared selection (False: the plain likelihood)
    seed : int or SeedSequence, seeds the walkers, the sampler and the draws
    max_steps : int, step cap of the MCMC (mode "mcmc"); the run's autocorr_factor still applies
    n_draws : int, number of posterior draws of k to return (for simulation-based calibration):
        Laplace Gaussian draws, importance-weighted resamples, or evenly spaced chain draws

    Returns
    -------
    dict: `inference.k_estimate.KEstimate.as_dict`: k (MAP on the "laplace" path, else the
    posterior median), k_std, interval68, interval95 (lists [low, high]), converged (bool), tau_max and n_steps (NaN and 0 without a chain), path
    (which estimator ran: "laplace", "importance", "short chain" or "mcmc"), ess_fraction (of the
    importance weights, NaN otherwise) and k_draws (ndarray) when n_draws > 0.
    """
    if mode not in CAMPAIGN_MODES:
        raise ConfigError(f"estimator.mode: expected one of {', '.join(CAMPAIGN_MODES)}, got {mode!r}")
    model = build_model(config, data, selection_aware=selection_aware, catalog=catalog)
    return estimate_k(model, mode=mode, sampler=config.sampler, seed=seed, max_steps=max_steps,
                      n_draws=n_draws).as_dict()
