"""How the forecast width of k changes with the plan (docs/method.md#forecast).

Every scan is a list of rows (dicts). Size and prior scans reuse the per-object information (the
information of a sample grows linearly with its size); the depth scan simulates the distant sample
again for every upper redshift.
"""

import numpy as np

from .fisher import exclusion_power, expected_information, population

#: Factors applied to every sample's size at once.
SIZE_FACTORS = (0.25, 0.5, 1.0, 2.0, 4.0, 8.0)
#: Factors applied to one sample's size (0: the plan without it).
SAMPLE_FACTORS = (0.0, 0.25, 0.5, 1.0, 2.0, 4.0)
#: Offset-prior widths, dex (inf: no prior, the data alone).
OFFSET_WIDTHS = (0.03, 0.1, 0.2, 0.3, 0.5, 1.0, 2.0, np.inf)
#: Sizes of the degeneracy breaker.
ANCHOR_SIZES = (0, 10, 30, 100, 300, 1000)
#: Upper redshift of the distant sample as z_lo + factor (z_hi - z_lo).
DEPTH_FACTORS = (0.5, 0.75, 1.0, 1.5, 2.0)
#: Offset-prior widths relative to the plan's in the breaker scan (as in the fit's sensitivity rows).
WIDTH_SCALES = {"sigma_k_narrow": 1.0 / 3.0, "sigma_k": 1.0, "sigma_k_wide": 3.0, "sigma_k_free": np.inf}


def power_row(sigma_k, k_true, threshold):
    """sigma_k with the power to exclude k = 0 and k = 3 at `threshold` sigma."""
    return {"sigma_k": sigma_k,
            "power_exclude_k0": exclusion_power(k_true, 0.0, sigma_k, threshold),
            "power_exclude_k3": exclusion_power(k_true, 3.0, sigma_k, threshold)}


def base_sizes(plan):
    """Planned sizes, with a new degeneracy breaker at 0 objects."""
    return {**plan.sizes, plan.anchor: plan.sizes.get(plan.anchor, 0)}


def size_scans(info, plan):
    """σ_k against the total size (every sample scaled together) and against each sample's size.

    Returns
    -------
    dict: "n_all" rows (factor, n_total, sigma_k, powers) and "n[<sample>]" rows (n, sigma_k, powers)
    """
    k_true, threshold = plan.truth.k, plan.threshold_sigma
    sizes = base_sizes(plan)
    scans = {"n_all": []}
    for factor in SIZE_FACTORS:
        scaled = {name: n * factor for name, n in sizes.items()}
        scans["n_all"].append({"factor": factor, "n_total": int(round(sum(scaled.values()))),
                               **power_row(info.sigma_k(scaled), k_true, threshold)})
    for name, n in plan.sizes.items():
        rows = []
        for factor in SAMPLE_FACTORS:
            n_new = int(round(n * factor))
            rows.append({"n": n_new, **power_row(info.sigma_k({**sizes, name: n_new}), k_true, threshold)})
        scans[f"n[{name}]"] = rows
    return scans


def width_scan(info, plan):
    """σ_k against the width of every offset prior (dex; None in JSON for no prior)."""
    sizes = base_sizes(plan)
    return [{"width": width, **power_row(info.sigma_k(sizes, offset_width=width), plan.truth.k,
                                         plan.threshold_sigma)}
            for width in OFFSET_WIDTHS]


def breaker_scan(info, plan):
    """σ_k against the size of the degeneracy breaker, for offset-prior widths ×⅓, ×1, ×3 of the
    plan's and without offset prior. At size 0 the plan has no local sample measured with the
    distant sample's method: there σ_k follows the offset prior; a large breaker makes it not."""
    sizes = base_sizes(plan)
    counts = sorted(set(ANCHOR_SIZES) | {plan.sizes.get(plan.anchor, 0)})
    rows = []
    for n in counts:
        trial = {**sizes, plan.anchor: n}
        row = {"n": n, **{key: info.sigma_k(trial, offset_scale=scale) for key, scale in WIDTH_SCALES.items()}}
        row.update(power_row(row["sigma_k"], plan.truth.k, plan.threshold_sigma))
        rows.append(row)
    return rows


def cheapest_breaker(info, plan, tolerance=0.1, largest=100000):
    """The smallest size of the degeneracy breaker at which k no longer rests on the offset priors:
    σ_k without offset prior within `tolerance` (10 %) of σ_k with priors ×⅓. Searched on a
    geometric grid (about 5 % steps) up to `largest`; None when not reached."""
    sizes = base_sizes(plan)
    for n in np.unique(np.round(np.geomspace(1, largest, 240)).astype(int)):
        trial = {**sizes, plan.anchor: n}
        free = info.sigma_k(trial, offset_scale=np.inf)
        if np.isfinite(free) and free <= (1 + tolerance) * info.sigma_k(trial, offset_scale=1 / 3):
            return {"n": int(n), "sigma_k": info.sigma_k(trial), "tolerance": tolerance}
    return None


def depth_scan(plan, info, seed, extra_tables=()):
    """σ_k against the upper redshift of the distant sample (simulated samples only; [] otherwise).

    Each point simulates the plan again (same seed) with the distant sample's z_range upper end
    moved, and recomputes the information; the planned depth reuses `info`.
    """
    spec = plan.sim_spec(plan.distant)
    if spec is None:
        return []
    rows = []
    for factor in DEPTH_FACTORS:
        z_max = min(spec.z_lo + factor * (spec.z_hi - spec.z_lo), 20.0)
        if factor == 1.0:
            trial_info = info
        else:
            tables = [dict(t, z_range=[spec.z_lo, z_max]) if t["name"] == plan.distant else t
                      for t in plan.sim_raw["sample"]]
            trial = plan.with_sample_tables(tables)
            trial_info = expected_information(trial, population(trial, extra_tables, seed=seed))
        rows.append({"z_max": z_max, **power_row(trial_info.sigma_k(base_sizes(plan)), plan.truth.k,
                                                 plan.threshold_sigma)})
    return rows
