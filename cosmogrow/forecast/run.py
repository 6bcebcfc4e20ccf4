"""A whole forecast: information, width of k, power, scans and the check by mocks.

`run_forecast(plan, check=..., seed=...)` returns the content of forecast.json; nothing here
prints, draws or writes files.
"""

import numpy as np

from ..background import describe
from ..campaigns.mocks import fit_replica
from ..data.catalog import Catalog
from ..errors import ConfigError
from ..inference.fit import FitData
from ..outputs import package_versions
from ..seeding import child_seed, make_rng
from ..simulation.population import simulate_population
from ..simulation.resample import resample_hosts
from . import scans
from .fisher import expected_information, population, sigma_of
from .scans import base_sizes, power_row

CAVEATS = (
    "The forecast is the large-sample (Cramér-Rao) width at the plan's truth: it assumes the model, "
    "the selection functions and the truth of the plan are right, and no error beyond those modelled.",
    "The power to exclude k0 is Φ(|k_true − k0|/σ_k − t) for a Gaussian estimator centred on the "
    "truth; the mocks' spread of k checks the width, not systematic errors of real data.",
    "Offset priors enter as constraints; the offset-width and breaker scans show how much of σ_k "
    "rests on them.",
)


def run_forecast(plan, *, check=None, seed=None, on_mock=None):
    """Forecast of a plan.

    Parameters
    ----------
    plan : forecast.plan.ForecastPlan
    check : int, optional, number of mocks fitted to check the width (default: the plan's)
    seed : int, optional, wins over the plan's seed; with neither, 0
    on_mock : callable(i, n), optional, called after each mock (progress)

    Returns
    -------
    dict (the content of forecast.json): sigma_k, power_exclude_k0, power_exclude_k3,
    threshold_sigma, k_true, parameters (forecast std of every parameter), samples, check
    ({n, mean, std, std_error, ratio, ...}), scans (lists of rows), degeneracy, caveats, provenance
    """
    seed = int(seed if seed is not None else (plan.sim_raw.get("seed") or 0))
    extra = [plan.anchor_table] if plan.anchor_table else []
    info = expected_information(plan, population(plan, extra, seed=child_seed(seed, 0)))
    sizes = base_sizes(plan)
    sigma_k = info.sigma_k(sizes)
    if not np.isfinite(sigma_k):
        raise ConfigError(f"{plan.source}: no redshift lever arm: k is not measurable with this plan "
                          "(its Fisher matrix is singular in k)")
    result = {**power_row(sigma_k, plan.truth.k, plan.threshold_sigma),
              "threshold_sigma": plan.threshold_sigma, "k_true": plan.truth.k,
              "parameters": parameter_widths(info, sizes),
              "samples": describe_samples(plan, info),
              "check": check_by_mocks(plan, sigma_k, plan.check if check is None else check,
                                      child_seed(seed, 1), on_mock)}
    result["scans"] = {**scans.size_scans(info, plan), "offset_width": scans.width_scan(info, plan),
                       "breaker": scans.breaker_scan(info, plan),
                       f"z_max[{plan.distant}]": scans.depth_scan(plan, info, child_seed(seed, 0), extra)}
    result["degeneracy"] = {"distant": plan.distant, "local": plan.local, "anchor": plan.anchor,
                            "anchor_is_new": plan.anchor_table is not None,
                            "anchor_sample": plan.anchor_table,
                            "breaker_needed": scans.cheapest_breaker(info, plan),
                            "method": plan.method_of(plan.distant),
                            "zero_point_method": plan.run_config.model.zero_point_method}
    result["caveats"] = list(CAVEATS)
    result["warnings"] = forecast_warnings(result)
    result["provenance"] = {"plan": plan.source, "seed": seed, "mc_objects": info.mc_sizes,
                            "cosmology": describe(plan.cosmology), "truth": plan.truth.to_dict(),
                            "model": plan.run_config.to_dict()["model"],
                            "inputs": [i for kept in plan.kept for i in kept.inputs],
                            "versions": package_versions()}
    return result


def forecast_warnings(result):
    """Plain-words warnings: mocks that disagree with the forecast, a width resting on a prior."""
    warnings = []
    check, sigma_k = result["check"], result["sigma_k"]
    if check.get("std") is not None:
        if abs(check["std"] - sigma_k) > 3 * check["std_error"] + 0.1 * sigma_k:
            warnings.append(f"the spread of k over {check['n']} mocks ({check['std']:.3f}) differs from the "
                            f"forecast ({sigma_k:.3f}): the large-sample approximation does not hold well "
                            "for this plan (few objects, a strong selection or a boundary); trust the mocks")
        if abs(check["mean"] - result["k_true"]) > 3 * check["std"] / np.sqrt(check["n"]):
            warnings.append(f"the mean k of the mocks ({check['mean']:.3f}) differs from the true k "
                            f"({result['k_true']:g}): the fit is biased for this plan (e.g. a method offset "
                            "whose prior is centred away from its true value)")
        if check["converged"] < check["n"]:
            warnings.append(f"{check['n'] - check['converged']} of {check['n']} mock fits did not pass "
                            "the fast estimator's convergence check")
    planned = next((row for row in result["scans"]["breaker"]
                    if row["n"] == result["samples"].get(result["degeneracy"]["anchor"], {}).get("n", 0)), None)
    if planned and (not np.isfinite(planned["sigma_k_free"]) or planned["sigma_k_free"] > 1.5 * sigma_k):
        free = "unbounded" if not np.isfinite(planned["sigma_k_free"]) else f"{planned['sigma_k_free']:.3f}"
        warnings.append(f"σ(k) rests on the offset priors: without them it would be {free} instead of "
                        f"{sigma_k:.3f}; a local sample measured with {result['degeneracy']['method']} "
                        "masses would break the degeneracy (see the breaker scan)")
    return warnings


def parameter_widths(info, sizes):
    """Forecast standard deviation of every parameter (inf when not informed)."""
    matrix = info.fisher(sizes)
    return {name: sigma_of(matrix, i) for i, name in enumerate(info.names)}


def describe_samples(plan, info):
    """Per sample: n, method, redshift range and its share of the information on k."""
    sizes = base_sizes(plan)
    full = 1.0 / info.sigma_k(sizes) ** 2
    out = {}
    for name, n in plan.sizes.items():
        spec = plan.sim_spec(name)
        kept = next((k for k in plan.kept if k.name == name), None)
        without = info.sigma_k({**sizes, name: 0})
        out[name] = {"n": n, "method": plan.method_of(name),
                     "z_range": [spec.z_lo, spec.z_hi] if spec else kept.z_range,
                     "kept_catalogue": kept is not None,
                     "selection": [m.to_dict() for m in (spec.selection if spec else kept.selection)],
                     "sigma_k_without": without,
                     "information_share": 1.0 - (1.0 / without**2 if np.isfinite(without) else 0.0) / full}
    return out


def offset_widths(plan):
    """Prior width (dex) of the offset of every method of the plan but the zero point."""
    options = plan.run_config.model
    widths = options.method_offset_width
    methods = {plan.method_of(name) for name in plan.sizes} - {options.zero_point_method}
    if isinstance(widths, dict):
        return {m: float(widths.get(m, widths.get("default", 0.3))) for m in sorted(methods)}
    return {m: float(widths) for m in sorted(methods)}


def mock_truth(plan, rng):
    """The plan's truth with every method offset drawn from its prior around the plan's value, so
    that the mocks' spread of k carries the offset uncertainty the prior states (the forecast's
    sigma_k includes the prior's precision)."""
    truth = plan.truth.to_dict()
    for method, width in offset_widths(plan).items():  # relative to the zero point, whose offset stays
        truth["delta"][method] = truth["delta"].get(method, 0.0) + width * rng.standard_normal()
    return truth


def draw_mock(plan, seed):
    """One mock of the plan at its planned sizes (simulated and kept samples); its method offsets
    are drawn from their priors (`mock_truth`)."""
    truth = mock_truth(plan, make_rng(child_seed(seed, 99)))
    parts = []
    if plan.sim.samples:
        parts.append(simulate_population({**plan.sim_raw, "truth": truth}, seed=child_seed(seed, 0)).catalog)
    for i, kept in enumerate(plan.kept):
        parts.append(resample_hosts(kept.catalog, truth, {kept.name: list(kept.selection)}, plan.cosmology,
                                    seed=child_seed(seed, 1 + i), host_errors=plan.run_config.model.host_errors))
    return Catalog.concat(parts)


def check_by_mocks(plan, sigma_k, n_mocks, seed, on_mock=None):
    """Fit `n_mocks` mocks of the plan with the fast estimator (MAP + Laplace) and compare the spread
    of k with the forecast.

    Returns
    -------
    dict: n, mean, std (of the MAP k over mocks), std_error (of std, Gaussian approximation
    std / sqrt(2 (n - 1))), ratio (std / sigma_k), mean_laplace_std, converged (count), k (list)
    """
    if n_mocks < 2:
        return {"n": int(n_mocks), "mean": None, "std": None, "std_error": None, "ratio": None,
                "mean_laplace_std": None, "converged": 0, "k": []}
    data = FitData(catalog=None, files=[], selections=plan.selections(), cosmology=plan.cosmology)
    ks, stds, converged = [], [], 0
    for i in range(n_mocks):
        mock = draw_mock(plan, child_seed(seed, i))
        fit = fit_replica(plan.run_config, data, mock, mode="fast", seed=child_seed(seed, i, 1))
        ks.append(fit["k"])
        stds.append(fit["k_std"])
        converged += bool(fit["converged"])
        if on_mock:
            on_mock(i + 1, n_mocks)
    ks = np.array(ks)
    std = float(np.std(ks, ddof=1))
    return {"n": int(n_mocks), "mean": float(np.mean(ks)), "std": std,
            "std_error": std / np.sqrt(2.0 * (n_mocks - 1)), "ratio": std / sigma_k,
            "mean_laplace_std": float(np.mean(stds)), "converged": int(converged), "k": ks.tolist()}
