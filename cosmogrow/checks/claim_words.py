"""The verdict of a challenged hypothesis, in one status word and plain sentences
(docs/method.md#challenge).

Status words: "consistent", "not consistent", "depends on assumptions". The last is taken from the
fit's verdict rules (`inference.verdicts`) on the same data and threshold, so fit and challenge
agree on it; otherwise the mocks decide, and a disagreement with the fit's likelihood-ratio
verdict is explained in one line. A status never hides that the hypothesis needs an offset more
than PULL_LIMIT σ outside its prior or that the estimator is biased by more than BIAS_LIMIT σ in
its mocks: the sentence says so.
"""

import numpy as np

from ..inference.verdicts import CONSISTENT, DEPENDS, EXCLUDED, sigma_from_p

NOT_CONSISTENT = "not consistent"
STATUSES = (CONSISTENT, NOT_CONSISTENT, DEPENDS)
#: An offset further than this many prior standard deviations from 0 is named in the verdict.
PULL_LIMIT = 2.0
#: A bias of the selection-aware estimator beyond this many spreads of its mocks is named.
BIAS_LIMIT = 0.5
#: The fit's verdict word that corresponds to each status.
FIT_WORD = {CONSISTENT: CONSISTENT, NOT_CONSISTENT: EXCLUDED, DEPENDS: DEPENDS}
#: Within this many σ of the threshold, likelihood ratio and mocks may fall on either side.
NEAR_THRESHOLD = 0.5


def caveats(row):
    """What a hypothesis needs, in sentences: offsets far outside their priors, a biased estimator."""
    out = []
    far = [f"{name} = {row['nuisance_values'][name]:+.2f} dex, {abs(pull):.1f}σ outside its prior "
           f"N(0, {row['nuisance_prior_sd'][name]:.2g} dex)"
           for name, pull in row["nuisance_pulls"].items() if abs(pull) > PULL_LIMIT]
    if far:
        out.append(f"k = {row['k']:g} needs {' and '.join(far)}.")
    aware = row["selection_aware"]
    if np.isfinite(aware["bias_sigma"]) and abs(aware["bias_sigma"]) > BIAS_LIMIT:
        out.append(f"The selection-aware estimator is biased by {aware['bias_sigma']:+.1f}σ in the mocks "
                   f"at k = {row['k']:g} (median k = {aware['median']:.2f} for a truth of {row['k']:g}).")
    return out


def _short(row):
    """The caveats in a clause: "only with an offset 3.2σ outside its prior and an estimator ..."."""
    parts = []
    worst = max((abs(p) for p in row["nuisance_pulls"].values()), default=0.0)
    if worst > PULL_LIMIT:
        parts.append(f"only with an offset {worst:.1f}σ outside its prior")
    bias = row["selection_aware"]["bias_sigma"]
    if np.isfinite(bias) and abs(bias) > BIAS_LIMIT:
        parts.append(f"with an estimator biased by {bias:+.1f}σ in its mocks")
    return " and ".join(parts)


def disagreement(row, fit_verdict, sigma, threshold, observed):
    """One line on why the mocks and the fit's likelihood ratio fall on different sides."""
    aware = row["selection_aware"]
    head = (f"Fit and challenge differ on k = {row['k']:g}: the fit's profile likelihood ratio gives "
            f"{fit_verdict['sigma']:.1f}σ ({fit_verdict['verdict']}), the mocks {sigma:.1f}σ, "
            f"on either side of {threshold:g}σ, because ")
    if np.isfinite(aware["bias_sigma"]) and abs(aware["bias_sigma"]) > BIAS_LIMIT:
        why = (f"the estimator is biased by {aware['bias_sigma']:+.1f}σ at k = {row['k']:g}, which "
               "the mocks include and the likelihood ratio does not.")
    elif min(abs(fit_verdict["sigma"] - threshold), abs(sigma - threshold)) < NEAR_THRESHOLD:
        why = (f"both lie within {NEAR_THRESHOLD:g}σ of the threshold, where the likelihood ratio's "
               "asymptotic (Wilks) reading and the mocks' finite spread can differ.")
    else:
        why = (f"the likelihood ratio takes the width of k from its curvature at the data (σ_k = "
               f"{observed['k_std']:.2f}), while the mocks measure the estimator's spread on this "
               f"design ({aware['spread']:.2f}); the mocks are the direct test.")
    return head + why


def hypothesis_verdict(label, row, observed, fit_verdict, alpha, threshold, selection_declared):
    """Status, p-value, σ, agreement with the fit and the sentence for one hypothesis.

    Parameters
    ----------
    label : "claim" or "null"; row : the hypothesis' entry of the challenge result
    observed : {estimator: fit of the data}; fit_verdict : dict from `inference.verdicts.judge`
    alpha : float, two-sided p of the threshold; threshold : float, σ
    selection_declared : bool
    """
    aware = row["selection_aware"]
    p = aware["p_value"]
    sigma = sigma_from_p(p) if np.isfinite(p) else float("nan")
    from_mocks = CONSISTENT if p >= alpha else NOT_CONSISTENT
    status = DEPENDS if fit_verdict["verdict"] == DEPENDS else from_mocks
    agrees = FIT_WORD[status] == fit_verdict["verdict"]
    needs = caveats(row)
    subject = f"{'A claimed ' if label == 'claim' else ''}k = {row['k']:g}"
    modelled = ("once their selection is modelled" if selection_declared
                else "(no selection is declared, so the selection-aware fit is the plain fit)")
    typical = "typical" if from_mocks == CONSISTENT else "atypical"
    evidence = (f"the selection-aware estimate k = {observed['selection_aware']['k']:.2f} is {typical} "
                f"of mocks of their design at k = {row['k']:g} (95 % of mocks in "
                f"[{aware['interval95'][0]:.2f}, {aware['interval95'][1]:.2f}]; p = {p:.3g}, "
                f"{sigma:.1f}σ against a threshold of {threshold:g}σ)")
    if status == DEPENDS:
        text = (f"Whether {subject[0].lower() + subject[1:]} is consistent with these data depends on "
                f"assumptions: {fit_verdict['reason']} With the configured constraint, {evidence}.")
    else:
        but = f", but {_short(row)}" if needs and status == CONSISTENT else ""
        text = f"{subject} is {status} with these data {modelled}{but}: {evidence}."
    if needs:
        text += " " + " ".join(needs)
    if fit_verdict.get("data_alone"):
        text += " " + fit_verdict["data_alone"]
    return {"status": status, "consistent": {CONSISTENT: True, NOT_CONSISTENT: False}.get(status),
            "p_value": p, "sigma": sigma, "from_mocks": from_mocks,
            "fit_verdict": fit_verdict["verdict"], "fit_sigma": fit_verdict["sigma"],
            "agrees_with_fit": agrees, "caveats": needs,
            "disagreement": None if agrees else disagreement(row, fit_verdict, sigma, threshold,
                                                             observed["selection_aware"]),
            "text": text}


def summary_lines(hypotheses, verdict, observed, selection_declared):
    """The plain-words summary of a challenge: verdicts, disagreements, the cost of ignoring selection."""
    lines = [verdict["claim"]["text"], verdict["null"]["text"]]
    lines += [row["disagreement"] for row in verdict.values() if row["disagreement"]]
    if selection_declared:
        for row in hypotheses.values():
            plain, aware = row["plain"], row["selection_aware"]
            lines.append(f"Under k = {row['k']:g} a plain fit that ignores the selection finds k ≈ "
                         f"{plain['median']:.2f} (bias {plain['bias']:+.2f}); the selection-aware fit "
                         f"finds {aware['median']:.2f} (bias {aware['bias']:+.2f}). The data's plain "
                         f"estimate is {observed['plain']['k']:.2f}.")
    else:
        lines.append("No selection is declared for any sample: if the samples were selected on "
                     "black-hole mass, declare it, or these verdicts test the wrong design.")
    return lines
