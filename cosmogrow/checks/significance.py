"""The fit's significances on the data, for the checks that must agree with the fit
(docs/method.md#verdicts): profile-likelihood σ against reference values of k with the offset
constraints at ⅓×, 1× and 3× their configured widths and unconstrained, and the pulls of the
offsets against their priors at a given k.

The numbers come from the fit's own machinery (`inference.sensitivity`), so that the challenge
judges a claim with exactly the significances the fit reports.
"""

import numpy as np

from ..errors import ConfigError
from ..campaigns.mocks import design_truth
from ..inference.laplace import find_map
from ..inference.sensitivity import ConstrainedLikelihood, offset_constraints, profile_significances
from ..inference.verdicts import WIDTH_SCALES


def data_significance_rows(model, k_refs, start):
    """Rows {setting, value, sigma_by_k} as the fit's sensitivity table has them (σ only).

    Parameters
    ----------
    model : CoupledGrowthModel of the data (selection-aware when a selection is declared)
    k_refs : sequence of float, reference values of k
    start : ndarray, a starting point (e.g. the MAP)

    Returns
    -------
    list of dict: one "offset_width_scale" row per scale of `verdicts.WIDTH_SCALES` and one
    "offsets_unconstrained" row, or a single "as_configured" row when the model has no offset.
    """
    if offset_constraints(model)[0].size == 0:
        _, sigmas = profile_significances(ConstrainedLikelihood(model, 1.0), k_refs, start)
        return [{"setting": "as_configured", "value": 1.0, "sigma_by_k": sigmas}]
    rows = []
    for scale in WIDTH_SCALES + (None,):
        _, sigmas = profile_significances(ConstrainedLikelihood(model, scale), k_refs, start)
        rows.append({"setting": "offset_width_scale" if scale else "offsets_unconstrained",
                     "value": scale, "sigma_by_k": sigmas})
    return rows


def offset_nuisances(model, theta):
    """Every offset with a Gaussian prior (mass methods, host types) at parameters `theta`.

    Returns
    -------
    dict: values {name: dex}, prior_sd {name: dex}, pulls {name: value / prior sd}
    """
    index, widths = offset_constraints(model)
    theta = np.asarray(theta, dtype=float)
    names = [model.names[i] for i in index]
    return {"values": {n: float(theta[i]) for n, i in zip(names, index)},
            "prior_sd": {n: float(w) for n, w in zip(names, widths)},
            "pulls": {n: float(theta[i] / w) for n, i, w in zip(names, index, widths)}}


def nuisances_at(model, start, k):
    """Truth table of the data's design at coupling `k` and its offsets against their priors.

    The nuisance parameters maximise the run's posterior (offset priors included) with k held at
    `k`. Raises ConfigError when k lies outside the prior range of k.

    Returns
    -------
    truth : Truth (see `campaigns.mocks.design_truth`); offsets : dict (see `offset_nuisances`)
    """
    low, high = model.lower[model.index_k], model.upper[model.index_k]
    if not low < k < high:
        raise ConfigError(f"k = {k:g} is outside the prior range of k [{low:g}, {high:g}]")
    theta, _, _ = find_map(model, start, fixed={model.index_k: float(k)})
    return design_truth(model, theta, k), offset_nuisances(model, theta)

