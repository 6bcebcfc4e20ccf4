"""Replicas of a design: mocks simulated like the data and fitted exactly like the data.

Shared by injection-recovery campaigns (`cosmogrow.campaigns.runner`) and the null tests / challenge of a
claimed k. Three verbs:

- `design_truth`: a truth table (the model's parameter names, DEVELOPERS.md) from a fit's MAP, with k replaced;
- `draw_replica` / `draw_simulated`: one mock catalogue of the data's own design (resample-hosts
  mode, the data's selections and cosmology) or of a simulator configuration;
- `fit_replica`: the fit of one mock, fast (MAP + Laplace) or by MCMC, reduced to the facts about k.

Nothing here loops over replicas, prints or writes files.
"""

import numpy as np

from ..simulation import population as simulate
from ..config import load_toml
from ..errors import ConfigError
from ..inference.fit import FitData, build_model
from ..inference.k_estimate import CAMPAIGN_MAX_STEPS, MODES, estimate_k
from ..outputs import sha256_file
from ..simulation.plan import parse_sim_config


def design_truth(model, theta_map, k):
    """Truth table of a design: the fitted parameters at `theta_map` with k replaced.

    Parameters
    ----------
    model : model.CoupledGrowthModel, the fitted model (gives names and fixed options)
    theta_map : array_like, shape (model.ndim,), e.g. the MAP of the data
    k : float, injected coupling exponent

    Returns
    -------
    dict with k, alpha (log10 Msun), beta, sigma_int (dex; a dict per sample when the scatter is
    per sample), delta (dict method -> offset in dex, the zero-point method 0), delta_host (dict
    host type -> shift in dex, the zero-point type 0; empty without host types), gamma, s_pivot
    (log10 Msun), z_ref, and f_out / sigma_out when the model has outliers.
    """
    layout = model.layout
    theta = np.asarray(theta_map, dtype=float)
    values = layout.to_dict(theta)
    scatter = layout.scatter_by_name(theta)
    sigma_int = scatter if len(scatter) > 1 else next(iter(scatter.values()))
    delta = layout.offsets_by_label(theta, "method")
    truth = {"k": float(k), "alpha": values["alpha"], "beta": values.get("beta", 1.0),
             "sigma_int": sigma_int, "delta": delta,
             "delta_host": layout.offsets_by_label(theta, "host_type"), "gamma": float(model.gamma),
             "s_pivot": float(model.options.log_mstar_pivot), "z_ref": float(model.options.z_ref)}
    if "f_out" in values:
        truth.update(f_out=values["f_out"], sigma_out=values["sigma_out"])
    if getattr(model, "host_priors", None):
        truth["host_priors"] = {name: list(prior) for name, prior in model.host_priors.items()}
    return truth


def apply_overrides(truth, overrides):
    """A copy of `truth` with user overrides (a [truth] table); dict entries are merged.

    Raises ConfigError for a name the truth table does not have.
    """
    out = {key: (dict(value) if isinstance(value, dict) else value) for key, value in truth.items()}
    for key, value in (overrides or {}).items():
        if key not in out:
            raise ConfigError(f"truth.{key}: unknown parameter; expected one of {', '.join(out)}")
        if isinstance(out[key], dict) and isinstance(value, dict):
            unknown = sorted(set(value) - set(out[key]))
            if unknown and out[key]:  # an empty table (no offsets given) accepts any name
                raise ConfigError(f"truth.{key}.{unknown[0]}: unknown name; expected one of "
                                  f"{', '.join(out[key])}")
            out[key].update(value)
        elif isinstance(out[key], dict):
            out[key] = {name: value for name in out[key]}
        else:
            out[key] = value
    return out


def draw_replica(config, data, truth, seed):
    """One mock of the data's own design: hosts, redshifts, methods and errors kept, masses redrawn.

    Parameters
    ----------
    config : config.RunConfig of the data; its model.host_errors says how the true hosts behind
        the observed ones are drawn (as the fit's likelihood assumes them)
    data : fit.FitData, the real data (catalogue, selections per sample, cosmology)
    truth : dict, a truth table (see `design_truth`)
    seed : int or SeedSequence

    Returns
    -------
    catalog.Catalog
    """
    return simulate.resample_hosts(data.catalog, truth, data.selections, data.cosmology, seed=seed,
                                   host_errors=config.model.host_errors)


def draw_simulated(sim_config, truth, seed):
    """One mock of a simulator configuration with its [truth] table replaced by `truth`.

    Parameters
    ----------
    sim_config : dict, a parsed simulator configuration (see `cosmogrow.simulation.plan`)
    truth : dict, the truth table to simulate (e.g. the configuration's with k replaced)
    seed : int or SeedSequence

    Returns
    -------
    catalog.Catalog
    """
    return simulate.simulate_population({**sim_config, "truth": truth}, seed=seed).catalog


def simulation_design(path):
    """A simulator configuration file as a design: (raw config, FitData, truth table).

    The FitData has no rows (``catalog=None``): only the samples' selections and the cosmology,
    which is what fitting a mock needs. Raises ConfigError for a bad configuration.
    """
    raw = load_toml(path)
    parsed = parse_sim_config(raw)
    selections = {spec.name: list(spec.selection) for spec in parsed.samples}
    data = FitData(catalog=None, files=[{"path": str(path), "sha256": sha256_file(path)}],
                   selections=selections, cosmology=parsed.cosmology)
    return raw, data, parsed.truth.to_dict()


def replica_data(data, catalog):
    """FitData of a mock: the mock's rows with the design's selections and cosmology."""
    return FitData(catalog=catalog, files=[], selections=data.selections, cosmology=data.cosmology)


def fit_replica(config, data, catalog, *, mode="fast", selection_aware=True, seed=None,
                max_steps=CAMPAIGN_MAX_STEPS, n_draws=0):
    """Fit one mock exactly like the data and reduce the result to k.

    Parameters
    ----------
    config : config.RunConfig, the run's model, priors and sampler options
    data : fit.FitData, the design (its selections and cosmology are used; its rows are not)
    catalog : catalog.Catalog, the mock
    mode : "fast" (MAP + Laplace Gaussian) or "mcmc" (emcee ensemble as in `cosmogrow fit`)
    selection_aware : bool, model the declared selection (False: the plain likelihood)
    seed : int or SeedSequence, seeds the walkers, the sampler and the draws
    max_steps : int, step cap of the MCMC (mode "mcmc"); the run's autocorr_factor still applies
    n_draws : int, number of posterior draws of k to return (for simulation-based calibration)

    Returns
    -------
    dict: `inference.k_estimate.KEstimate.as_dict` (k, k_std, interval68, interval95, converged,
    tau_max, n_steps, and k_draws when n_draws > 0).
    """
    if mode not in MODES:
        raise ConfigError(f"estimator.mode: expected one of {', '.join(MODES)}, got {mode!r}")
    model = build_model(config, data, selection_aware=selection_aware, catalog=catalog)
    return estimate_k(model, mode=mode, sampler=config.sampler, seed=seed, max_steps=max_steps,
                      n_draws=n_draws).as_dict()
