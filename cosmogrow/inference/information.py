"""What carries the constraint on k: shares of the Fisher information by sample, source and host
type (docs/method.md#verdicts).

At the MAP θ̂ the observed information of the likelihood is a sum over objects, so over any
partition into groups g: F = Σ_g F_g, F_g = −∇∇ᵀ Σ_{i∈g} ln L_i(θ̂). The offset constraint terms add
their precision P (diagonal, 1/w² on each offset). The information on k after profiling the
nuisances is I = 1/[(F + P)⁻¹]_kk. Reported per group:

- ``loss_if_removed``: 1 − I(without g) / I, the fraction of the information on k lost when the
  group is left out (shares need not add to 1: two samples that only constrain k together each
  carry all of it);
- ``alone``: I(g alone, with the constraints) / I, what the group constrains by itself (its own
  redshift trend);
- ``fkk_share``: F_g,kk / Σ F_kk, the group's contribution to the curvature in k before profiling.
"""

import numpy as np

from .laplace import assemble_hessian, hessian_points
from .sensitivity import offset_constraints

# A parameter whose information falls below this fraction of its full-data value is dropped
# (it is not constrained without the group, e.g. the scatter of a sample left out).
_NEGLIGIBLE = 1e-8
# A group carrying at least this share alone, or losing this share when removed, is named.
NAMED_SHARE = 0.5


def group_fisher(model, theta, scale, labels):
    """Observed Fisher matrix of the likelihood per group of objects at θ.

    Parameters
    ----------
    model : CoupledGrowthModel
    theta : ndarray (ndim,), the MAP
    scale : ndarray (ndim,), finite-difference steps (e.g. 0.2 × Laplace standard deviations)
    labels : ndarray of str (N,), the group of each object

    Returns
    -------
    dict {group: ndarray (ndim, ndim)}
    """
    points, h, pairs = hessian_points(model, theta, scale)
    masks = {name: labels == name for name in dict.fromkeys(labels.tolist())}
    # one point at a time: the (points, N) array of all of them is 0.3 GB at N = 1e6
    sums = np.array([[values[mask].sum() for mask in masks.values()]
                     for values in map(model.per_object_log_likelihood, points)])
    return {name: -assemble_hessian(sums[:, j], h, pairs) for j, name in enumerate(masks)}


def k_information(fisher, index_k=0, reference=None):
    """1/[(F⁻¹)_kk] after dropping parameters F does not constrain (0 when k itself is not)."""
    reference = np.diag(fisher) if reference is None else reference
    keep = np.diag(fisher) > _NEGLIGIBLE * np.maximum(reference, 1e-300)
    if not keep[index_k]:
        return 0.0
    sub = fisher[np.ix_(keep, keep)]
    position = int(np.sum(keep[:index_k]))
    try:
        value = 1.0 / np.linalg.inv(sub)[position, position]
    except np.linalg.LinAlgError:
        return 0.0
    return float(max(value, 0.0)) if np.isfinite(value) else 0.0


def information_shares(model, theta, scale, labels):
    """Shares of the information on k carried by each group (see the module notes).

    Returns
    -------
    shares : dict {group: {n, loss_if_removed, alone, fkk_share}}
    full : float, the information on k from all groups (1/σ_k², per k²)
    """
    fishers = group_fisher(model, theta, scale, np.asarray(labels))
    prior = np.zeros((model.ndim, model.ndim))
    index, widths = offset_constraints(model)
    prior[index, index] = 1.0 / widths**2
    total = sum(fishers.values()) + prior
    reference = np.diag(total)
    full = k_information(total, model.index_k)
    fkk_sum = sum(f[model.index_k, model.index_k] for f in fishers.values())
    shares = {}
    for name, fisher in fishers.items():
        without = k_information(total - fisher, model.index_k, reference)
        alone = k_information(fisher + prior, model.index_k, reference)
        shares[name] = {"n": int(np.sum(np.asarray(labels) == name)),
                        "loss_if_removed": _fraction(full - without, full),
                        "alone": _fraction(alone, full),
                        "fkk_share": _fraction(fisher[model.index_k, model.index_k], fkk_sum)}
    return shares, full


def _fraction(part, whole):
    return float(np.clip(part / whole, 0.0, 1.0)) if whole > 0 else None


def describe_information(model, approx, catalog):
    """The summary's `information` block: per sample, per source and per host type (when the
    catalogue names more than one), one sentence naming what carries the constraint on k."""
    scale = 0.2 * np.clip(approx.std, 1e-6, None)
    per_sample, full = information_shares(model, approx.theta, scale, catalog.sample)
    block = {"measure": "Fisher information on k after profiling the nuisances, 1/(F^-1)_kk, at the "
                        "MAP, with the offset constraints as configured",
             "sigma_k": float(1.0 / np.sqrt(full)) if full > 0 else None,
             "per_sample": per_sample}
    for kind, labels in (("per_source", catalog.source), ("per_host_type", catalog.host_type)):
        block[kind] = None
        if len(set(np.asarray(labels).tolist())) > 1:
            block[kind], _ = information_shares(model, approx.theta, scale, labels)
    block["text"] = information_sentence(per_sample, "sample")
    return block


def information_sentence(shares, kind="sample"):
    """One sentence: which group(s) the constraint on k rests on."""
    if not shares:
        return ""
    alone = max(shares, key=lambda g: shares[g]["alone"] or 0.0)
    if (shares[alone]["alone"] or 0.0) >= NAMED_SHARE:
        return (f"The constraint on k rests mostly on the redshift trend inside {kind} '{alone}' "
                f"alone ({shares[alone]['alone']:.0%} of the information on k by itself).")
    needed = [g for g, row in shares.items() if (row["loss_if_removed"] or 0.0) >= NAMED_SHARE]
    if len(needed) > 1:
        quoted = [f"'{g}'" for g in needed]
        names = ", ".join(quoted[:-1]) + " and " + quoted[-1]
        least = min(shares[g]["loss_if_removed"] for g in needed)
        return (f"The constraint on k rests on the comparison between {kind}s {names}: leaving "
                f"out any one of them loses at least {least:.0%} of the information on k.")
    if needed:
        g = needed[0]
        return (f"The constraint on k rests on {kind} '{g}' compared with the others: leaving it out "
                f"loses {shares[g]['loss_if_removed']:.0%} of the information on k.")
    most = max(shares, key=lambda g: shares[g]["loss_if_removed"] or 0.0)
    return (f"No single {kind} carries the constraint on k: leaving out any one loses at most "
            f"{shares[most]['loss_if_removed'] or 0.0:.0%} of the information (most: '{most}').")
