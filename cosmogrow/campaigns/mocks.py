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
from scipy import stats

from ..simulation import population as simulate
from ..config import load_toml
from ..errors import ConfigError
from ..inference.laplace import gradient, laplace, start_walkers
from ..inference.fit import FitData, build_model
from ..inference.importance import importance_posterior
from ..outputs import sha256_file
from ..inference.mcmc import default_walkers, run_ensemble
from ..seeding import make_rng
from ..simulation.plan import parse_sim_config

#: Estimators of the null tests and the challenge; campaigns also offer "importance".
MODES = ("fast", "mcmc")
CAMPAIGN_MODES = ("fast", "importance", "mcmc")
#: Step cap of one MCMC fit in a campaign (the run configuration's cap is for the real data, where
#: one fit may take minutes; a campaign fits thousands). A capped chain is flagged converged=False.
CAMPAIGN_MAX_STEPS = 3000
_Z68 = stats.norm.ppf(0.84)
_Z95 = stats.norm.ppf(0.975)


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
    per sample), delta (dict method -> offset in dex, the zero-point method 0), gamma, s_pivot
    (log10 Msun), z_ref, and f_out / sigma_out when the model has outliers.
    """
    values = dict(zip(model.names, np.asarray(theta_map, dtype=float).tolist()))
    design = model.design
    if "sigma_int" in values:
        sigma_int = values["sigma_int"]
    else:
        sigma_int = {name: values[f"sigma_int[{name}]"] for name in design.scatter_names}
    delta = {design.method_names[0]: 0.0}
    delta.update({name: values[f"delta[{name}]"] for name in design.method_names[1:]})
    truth = {"k": float(k), "alpha": values["alpha"], "beta": values.get("beta", 1.0),
             "sigma_int": sigma_int, "delta": delta, "gamma": float(model.gamma),
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
    mode : "fast" (MAP + Laplace), "importance" (MAP + Laplace importance-sampled to the exact
        posterior when a selection is modelled, a short chain when that fails: see
        `fast_estimate`) or "mcmc" (emcee ensemble as in `cosmogrow fit`)
    selection_aware : bool, model the declared selection (False: the plain likelihood)
    seed : int or SeedSequence, seeds the walkers, the sampler and the draws
    max_steps : int, step cap of the MCMC (mode "mcmc"); the run's autocorr_factor still applies
    n_draws : int, number of posterior draws of k to return (for simulation-based calibration):
        Laplace Gaussian draws, importance-weighted resamples, or evenly spaced chain draws

    Returns
    -------
    dict: k (MAP on the "laplace" path, else the posterior median), k_std, interval68, interval95
    (lists [low, high]), converged (bool), tau_max and n_steps (NaN and 0 without a chain), path
    (which estimator ran: "laplace", "importance", "short chain" or "mcmc"), ess_fraction (of the
    importance weights, NaN otherwise) and k_draws (ndarray) when n_draws > 0.
    """
    if mode not in CAMPAIGN_MODES:
        raise ConfigError(f"estimator.mode: expected one of {', '.join(CAMPAIGN_MODES)}, got {mode!r}")
    model = build_model(config, data, selection_aware=selection_aware, catalog=catalog)
    walker_seed, sampler_seed, draw_seed = _children(seed, 3)
    approx = laplace(model)
    i = model.index_k
    if mode != "mcmc":
        out = fast_estimate(model, approx, make_rng(walker_seed), make_rng(draw_seed), n_draws,
                            correct=mode == "importance")
        if out is not None:
            return out
    path = "mcmc" if mode == "mcmc" else "short chain"
    n_walkers = default_walkers(model.ndim, config.sampler.walkers)
    start = start_walkers(model, approx, n_walkers, make_rng(walker_seed))
    chain = run_ensemble(model.log_prob, start, max_steps=int(max_steps),
                         autocorr_factor=config.sampler.autocorr_factor,
                         check_every=config.sampler.check_every, seed=sampler_seed)
    k = chain.samples[:, i]
    q = np.percentile(k, [2.5, 16, 50, 84, 97.5])
    out = {"k": float(q[2]), "k_std": float(np.std(k, ddof=1)),
           "interval68": [float(q[1]), float(q[3])], "interval95": [float(q[0]), float(q[4])],
           "converged": bool(chain.converged), "tau_max": float(chain.tau_max),
           "n_steps": int(chain.n_steps), "path": path, "ess_fraction": float("nan")}
    if n_draws:
        # evenly spaced over the (step-major) flat chain, i.e. spread over the whole run
        out["k_draws"] = k[np.linspace(0, len(k) - 1, int(n_draws)).round().astype(int)]
    return out


def fast_estimate(model, approx, rng, draw_rng, n_draws=0, correct=False):
    """The fast estimator's result, or None when it needs a short chain instead.

    MAP and Laplace interval (path "laplace"), unless `correct` and a selection is modelled: then
    the Laplace approximation proposes and importance sampling corrects it to the exact posterior
    (path "importance": weighted posterior median and quantiles of k, as MCMC mode reports them);
    None when the importance weights degenerate (inference.importance.MIN_ESS_FRACTION).
    """
    i = model.index_k
    if not correct or model.selection is None:
        k_map, k_std = float(approx.theta[i]), float(approx.std[i])
        out = {"k": k_map, "k_std": k_std,
               "interval68": [k_map - _Z68 * k_std, k_map + _Z68 * k_std],
               "interval95": [k_map - _Z95 * k_std, k_map + _Z95 * k_std],
               "converged": laplace_is_sound(model, approx), "tau_max": float("nan"), "n_steps": 0,
               "path": "laplace", "ess_fraction": float("nan")}
        if n_draws:
            out["k_draws"] = draw_rng.normal(k_map, k_std, int(n_draws))
        return out
    weighted = importance_posterior(model, approx, rng)
    if not weighted.adequate:
        return None
    q = weighted.quantiles(i)
    out = {"k": float(q[2]), "k_std": weighted.std(i), "interval68": [float(q[1]), float(q[3])],
           "interval95": [float(q[0]), float(q[4])], "converged": laplace_is_sound(model, approx),
           "tau_max": float("nan"), "n_steps": 0, "path": "importance",
           "ess_fraction": weighted.ess_fraction}
    if n_draws:
        out["k_draws"] = weighted.resample(i, int(n_draws), draw_rng)
    return out


def laplace_is_sound(model, approx, tolerance=0.01):
    """Whether a MAP + Laplace result can be trusted: minus the Hessian is positive definite and
    the Newton step from the MAP is below `tolerance` posterior standard deviations in every
    parameter. (L-BFGS-B's own flag is not used: it often reports an abnormal line-search end
    exactly at the optimum, where a Nelder-Mead polish moves no parameter by 1e-7.)"""
    curvature = -np.asarray(approx.hessian)
    if not np.all(np.isfinite(curvature)) or np.any(np.linalg.eigvalsh(curvature) <= 0):
        return False
    step = np.linalg.solve(curvature, gradient(model, approx.theta))
    return bool(np.all(np.abs(step) < tolerance * approx.std))


def _children(seed, n):
    """n child SeedSequences of `seed` that do not depend on (or change) its spawn counter."""
    parent = seed if isinstance(seed, np.random.SeedSequence) else np.random.SeedSequence(seed)
    return [np.random.SeedSequence(parent.entropy, spawn_key=parent.spawn_key + (j,))
            for j in range(n)]
