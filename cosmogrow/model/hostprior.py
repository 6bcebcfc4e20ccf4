"""The parent (pre-selection) distribution of true host masses of a selected sample.

Regression calibration (model.calibrated_hosts) needs the distribution of true hosts *before*
selection: a sample selected on black-hole mass over-represents massive hosts, so its observed host
moments are the wrong prior and leave a bias in k when host errors are large (on a mass-cut design
with 3 % acceptance and 0.15 dex host errors: +0.24 in k). With Gaussian parent hosts
N(mu_h, tau_h^2) per sample, the selected hosts have the density
    p(s_obs | z, S) = N(s_obs; mu_h, tau_h^2 + e_s^2) P(S | s_obs, z) / P(S | z),
with P(S | z) = Phi-type selection probability of the latent mass N(alpha + beta (mu_h - pivot) -
k_eff x, sigma^2 + beta^2 tau_h^2). Maximising it over (mu_h, tau_h) at fixed relation parameters
gives the prior; `fit.build_model` alternates this with the MAP of the relation (two rounds).
"""

import numpy as np
from scipy import optimize

from .likelihood import observed_host_moments


def _selected_host_log_like(params, rows, parts, model, catalog, selection, centred_pivot):
    """log p(s_obs | z, S) of a sample's hosts for each row of params = [[mean, log tau], ...]."""
    params = np.atleast_2d(params)
    centre, tau2 = params[:, :1], np.exp(2 * params[:, 1:2])
    s_obs = catalog.log_mstar[rows]
    err2 = catalog.log_mstar_err[rows] ** 2
    total_var = tau2 + err2
    log_hosts = -0.5 * np.sum((s_obs - centre) ** 2 / total_var + np.log(2 * np.pi * total_var), axis=1)
    shrink = tau2 / total_var
    s_true = shrink * s_obs + (1 - shrink) * centre
    beta, x, sigma2 = parts["beta"], model.design.x[rows], parts["sigma2"][rows]
    n_params = len(params)
    # conditional (given s_obs) and parent latent masses stacked, for one selection call
    # the latent mean of model.mean.latent_mean, summed in this order since the pinned fits were made
    base = parts["alpha"] - parts["k_eff"] * x + parts["host_offset"][rows]
    shape = (n_params, len(rows))
    mu = np.concatenate([np.broadcast_to(base + beta * (s_true - centred_pivot), shape),
                         np.broadcast_to(base + beta * (centre - centred_pivot), shape)])
    var = np.concatenate([np.broadcast_to(sigma2 + beta**2 * shrink * err2, shape),
                          np.broadcast_to(sigma2 + beta**2 * tau2, shape)])
    log_sel = selection.log_probability(mu, parts["delta"][rows], var, model.design.m_err[rows], rows=rows)
    # summed column by column (Fortran order), as the pinned fits were made
    log_sel = np.asfortranarray(log_sel).sum(axis=1)
    return log_hosts + log_sel[:n_params] - log_sel[n_params:]


def _value_and_gradient(params, *args, step=1e-5):
    """Minus the log likelihood and its central-difference gradient, in one batched evaluation."""
    points = np.array([params, params + (step, 0), params - (step, 0), params + (0, step), params - (0, step)])
    values = -_selected_host_log_like(points, *args)
    return values[0], np.array([values[1] - values[2], values[3] - values[4]]) / (2 * step)


def parent_host_priors(model, catalog, theta: np.ndarray, samples, pivot: float, start: dict | None = None) -> dict:
    """(mean, variance) of the parent true-host distribution of each named sample.

    Parameters
    ----------
    model : CoupledGrowthModel with a selection set
    catalog : Catalog of the model's rows
    theta : MAP of the model, fixing the relation
    samples : names of the selected samples
    pivot : log10 Msun, the model's host-mass pivot
    start : {sample: (mean, variance)}, optional starting values (e.g. the previous round's)
    """
    parts = model.components(theta)
    priors = {}
    for name in samples:
        rows = np.flatnonzero(catalog.sample == name)
        if len(rows) < 5:
            continue
        centre, spread = (start or {}).get(name) or observed_host_moments(
            catalog.log_mstar[rows], catalog.log_mstar_err[rows] ** 2)
        # a smooth 2-d problem: quasi-Newton with finite differences needs a third of the
        # evaluations of a simplex search
        result = optimize.minimize(
            _value_and_gradient, np.array([centre, 0.5 * np.log(spread)]), jac=True,
            args=(rows, parts, model, catalog, model.selection, pivot), method="L-BFGS-B",
            bounds=[(None, None), (-4.0, 1.0)], options={"ftol": 1e-10, "gtol": 1e-6})
        if np.all(np.isfinite(result.x)) and -4 < result.x[1] < 1 and np.isfinite(result.fun):
            priors[name] = (float(result.x[0]), float(np.exp(2 * result.x[1])))
    return priors
