"""Does a claimed k survive the data's selection? (docs/method.md#null-tests, "survival" of a claimed k.)

Mocks of the data's own design (`replicas.draw_replica`: hosts, redshifts, methods and errors kept,
black-hole masses redrawn with each sample's declared selection) are simulated under the claimed k
and under k = 0, the nuisance parameters of each hypothesis maximising the data's posterior with k
held there. Every mock is fitted twice, exactly like the data: with the selection-aware and with
the plain likelihood. That gives four distributions of the estimate.

What is compared: the data's selection-aware estimate against the selection-aware distribution
under each hypothesis: a two-sided Student-t predictive p-value (the observed estimate taken as
one more draw of the Gaussian the mocks' estimates follow; not limited to 1/(n+1) like the
empirical Monte Carlo p-value, which is reported beside it). The plain distributions show the bias a fit
that ignores the selection suffers (and the data's plain estimate is placed in them for reference).
"""

import numpy as np

from ..errors import ConfigError
from .context import Fitter, predictive_p, truth_at, two_sided_mc_p
from ..campaigns.mocks import MODES, draw_replica
from ..seeding import child_seed

ALPHA = 0.05
DEFAULT_REPLICAS = 200
ESTIMATORS = ("selection_aware", "plain")


def challenge_claim(config, data, claim, *, replicas=DEFAULT_REPLICAS, mode="fast", seed=0,
                    alpha=ALPHA, on_progress=None):
    """Place the data's estimate of k among mocks of its design at k = claim and at k = 0.

    Parameters
    ----------
    config : RunConfig; data : FitData
    claim : float, the claimed coupling exponent k
    replicas : int, mocks per hypothesis
    mode : "fast" (MAP + Laplace) or "mcmc"
    seed : int, mock r of hypothesis h uses ``child_seed(seed, h, r)`` (h = 1 claim, 2 null)
    alpha : float, a hypothesis is called inconsistent when its p-value is below alpha
    on_progress : callable(hypothesis, done, total), optional

    Returns
    -------
    dict: claim, observed {estimator: fit}, hypotheses {"claim"/"null": {k, truth, estimator:
    {k draws, median, interval95, bias, p_value}}}, verdict {"claim"/"null": {consistent, p_value,
    text}}, summary (plain-words lines).
    """
    _check(claim, replicas, mode, alpha)
    fitters = {"selection_aware": Fitter(config, data, mode=mode, selection_aware=True),
               "plain": Fitter(config, data, mode=mode, selection_aware=False)}
    observed = {name: fitter(data.catalog, seed=child_seed(seed, 0, j))
                for j, (name, fitter) in enumerate(fitters.items())}
    hypotheses = {}
    for h, (label, k) in enumerate((("claim", float(claim)), ("null", 0.0)), start=1):
        truth = truth_at(config, data, k)
        draws = {name: [] for name in fitters}
        unsound = {name: 0 for name in fitters}
        for r in range(replicas):
            mock = draw_replica(config, data, truth, child_seed(seed, h, r))
            for j, (name, fitter) in enumerate(fitters.items()):
                fit = fitter(mock, seed=child_seed(seed, h, r, j + 1))
                draws[name].append(fit["k"])
                unsound[name] += not fit["converged"]
            if on_progress is not None:
                on_progress(label, r + 1, replicas)
        hypotheses[label] = {"k": k, "truth": truth.to_dict(),
                             **{name: {**_describe(np.array(values), k, observed[name]["k"]),
                                       "not_converged": unsound[name]}
                                for name, values in draws.items()}}
    selection_declared = bool(any(data.selections.values()))
    verdict = {label: _verdict(label, row, observed, alpha, selection_declared)
               for label, row in hypotheses.items()}
    return {"claim": float(claim), "alpha": float(alpha), "mode": mode, "replicas": int(replicas),
            "seed": int(seed), "selection_declared": selection_declared, "observed": observed,
            "hypotheses": hypotheses, "verdict": verdict,
            "summary": _summary(hypotheses, verdict, observed, selection_declared)}


def _check(claim, replicas, mode, alpha):
    if not np.isfinite(claim):
        raise ConfigError(f"--claim: expected a finite number, got {claim!r}")
    if not (isinstance(replicas, (int, np.integer)) and replicas >= 3):
        raise ConfigError(f"--replicas: expected an integer >= 3, got {replicas!r}")
    if mode not in MODES:
        raise ConfigError(f"--mode: expected one of {', '.join(MODES)}, got {mode!r}")
    if not 0 < alpha < 0.5:
        raise ConfigError(f"--alpha: expected 0 < alpha < 0.5, got {alpha!r}")


def _describe(draws, k_true, k_observed):
    finite = draws[np.isfinite(draws)]
    lo, med, hi = np.percentile(finite, [2.5, 50, 97.5])
    return {"k": draws, "n_failed": int(draws.size - finite.size), "median": float(med),
            "interval95": [float(lo), float(hi)], "bias": float(med - k_true),
            "p_value": predictive_p(k_observed, finite),
            "p_value_empirical": two_sided_mc_p(k_observed, finite)}


def _verdict(label, row, observed, alpha, selection_declared):
    aware = row["selection_aware"]
    p = aware["p_value"]
    consistent = bool(p >= alpha)
    modelled = ("once their selection is modelled" if selection_declared
                else "(no selection is declared, so the selection-aware fit is the plain fit)")
    text = (f"A {'claimed ' if label == 'claim' else ''}k = {row['k']:g} is "
            f"{'' if consistent else 'not '}consistent with these data {modelled}: the "
            f"selection-aware estimate k = {observed['selection_aware']['k']:.2f} is "
            f"{'typical' if consistent else 'atypical'} of mocks of their design at "
            f"k = {row['k']:g} (95 % of mocks in [{aware['interval95'][0]:.2f}, "
            f"{aware['interval95'][1]:.2f}]; p = {p:.3g}).")
    return {"consistent": consistent, "p_value": p, "text": text}


def _summary(hypotheses, verdict, observed, selection_declared):
    lines = [verdict["claim"]["text"], verdict["null"]["text"]]
    if selection_declared:
        for label, row in hypotheses.items():
            plain = row["plain"]
            lines.append(f"Under k = {row['k']:g} a plain fit that ignores the selection finds k ≈ "
                         f"{plain['median']:.2f} (bias {plain['bias']:+.2f}); the selection-aware fit "
                         f"finds {row['selection_aware']['median']:.2f} (bias "
                         f"{row['selection_aware']['bias']:+.2f}). The data's plain estimate is "
                         f"{observed['plain']['k']:.2f}.")
    else:
        lines.append("No selection is declared for any sample: if the samples were selected on "
                     "black-hole mass, declare it, or these verdicts test the wrong design.")
    return lines
