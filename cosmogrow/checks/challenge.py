"""Does a claimed k survive the data's selection? (docs/method.md#challenge)

Mocks of the data's own design (`campaigns.mocks.draw_replica`: hosts, redshifts, methods and errors
kept, black-hole masses redrawn with each sample's declared selection) are simulated under the
claimed k and under k = 0, the nuisance parameters of each hypothesis maximising the data's
posterior with k held there; their values and their pulls against their priors are reported
(`nuisance_pulls`). Every mock is fitted twice, exactly like the data: with the selection-aware and
with the plain likelihood.

What is compared: the data's selection-aware estimate against the selection-aware mocks under each
hypothesis, by a two-sided Student-t predictive p-value (the observed estimate taken as one more
draw of the Gaussian the mocks' estimates follow; the empirical Monte Carlo p-value is reported
beside it). The threshold is the fit's (3σ by default), and the verdict word follows the fit's
rules (`inference.verdicts`): a claim whose exclusion flips as the offset constraints go from ⅓× to
3× their width "depends on assumptions"; otherwise the mocks decide between "consistent" and
"not consistent", and a disagreement with the fit's likelihood-ratio verdict is explained in one
line.
"""

import numpy as np

from ..campaigns.mocks import draw_replica
from ..inference.k_estimate import MODES
from ..errors import ConfigError
from ..inference.laplace import laplace
from ..inference.sensitivity import common_width, offset_subject
from ..inference.verdicts import DEFAULT_THRESHOLD, p_from_sigma, verdicts_from_rows
from ..seeding import child_seed
from .claim_words import hypothesis_verdict, summary_lines
from .context import Fitter, predictive_p, two_sided_mc_p
from .significance import data_significance_rows, nuisances_at

DEFAULT_REPLICAS = 200
ESTIMATORS = ("selection_aware", "plain")


def challenge_claim(config, data, claim, *, replicas=DEFAULT_REPLICAS, mode="fast", seed=0,
                    threshold=DEFAULT_THRESHOLD, on_progress=None):
    """Place the data's estimate of k among mocks of its design at k = claim and at k = 0.

    Parameters
    ----------
    config : RunConfig; data : FitData
    claim : float, the claimed coupling exponent k
    replicas : int, mocks per hypothesis
    mode : "fast" (MAP + Laplace) or "mcmc"
    seed : int, mock r of hypothesis h uses ``child_seed(seed, h, r)`` (h = 1 claim, 2 null)
    threshold : float, σ; a hypothesis is "not consistent" when its p-value is below the
        two-sided p of this many σ (the fit's threshold, 3σ by default)
    on_progress : callable(hypothesis, done, total), optional

    Returns
    -------
    dict: claim, threshold, alpha, observed {estimator: fit}, hypotheses {"claim"/"null": {k, truth,
    nuisance_values, nuisance_prior_sd, nuisance_pulls (offsets in dex, their prior sd, pulls),
    estimator: {k draws, median, interval95, bias, bias_sigma, p_value}}},
    fit_verdicts {"claim"/"null": the fit's verdict on that k}, verdict {"claim"/"null": {status,
    consistent, p_value, sigma, agrees_with_fit, disagreement, text}}, summary (plain-words lines).
    """
    _check(claim, replicas, mode, threshold)
    alpha = p_from_sigma(threshold)
    fitters = {"selection_aware": Fitter(config, data, mode=mode, selection_aware=True),
               "plain": Fitter(config, data, mode=mode, selection_aware=False)}
    model = fitters["selection_aware"].model(data.catalog)
    observed = {name: fitter(data.catalog, seed=child_seed(seed, 0, j))
                for j, (name, fitter) in enumerate(fitters.items())}
    labels = (("claim", float(claim)), ("null", 0.0))
    start = laplace(model).theta
    rows = data_significance_rows(model, [k for _, k in labels], start)
    fit_verdicts = dict(zip((label for label, _ in labels),
                            verdicts_from_rows(rows, [k for _, k in labels], threshold,
                                               common_width(model), offset_subject(model))))
    hypotheses = {}
    for h, (label, k) in enumerate(labels, start=1):
        truth, offsets = nuisances_at(model, start, k)
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
        hypotheses[label] = {"k": k, "truth": truth.to_dict(), "nuisance_values": offsets["values"],
                             "nuisance_prior_sd": offsets["prior_sd"],
                             "nuisance_pulls": offsets["pulls"],
                             **{name: {**describe_draws(np.array(values), k, observed[name]["k"]),
                                       "not_converged": unsound[name]}
                                for name, values in draws.items()}}
    selection_declared = bool(any(data.selections.values()))
    verdict = {label: hypothesis_verdict(label, row, observed, fit_verdicts[label], alpha, threshold,
                                         selection_declared)
               for label, row in hypotheses.items()}
    return {"claim": float(claim), "threshold": float(threshold), "alpha": alpha, "mode": mode,
            "replicas": int(replicas), "seed": int(seed), "selection_declared": selection_declared,
            "observed": observed, "hypotheses": hypotheses, "fit_verdicts": fit_verdicts,
            "significance_rows": rows, "verdict": verdict,
            "summary": summary_lines(hypotheses, verdict, observed, selection_declared)}


def _check(claim, replicas, mode, threshold):
    if not np.isfinite(claim):
        raise ConfigError(f"--claim: expected a finite number, got {claim!r}")
    if not (isinstance(replicas, (int, np.integer)) and replicas >= 3):
        raise ConfigError(f"--replicas: expected an integer >= 3, got {replicas!r}")
    if mode not in MODES:
        raise ConfigError(f"--mode: expected one of {', '.join(MODES)}, got {mode!r}")
    if not (np.isfinite(threshold) and 0 < threshold < 40):
        raise ConfigError(f"--threshold: expected a number of σ in (0, 40), got {threshold!r}")


def describe_draws(draws, k_true, k_observed):
    """Median, 95 % range, bias (also in units of the draws' spread) and the p-values of the data."""
    finite = draws[np.isfinite(draws)]
    lo, med, hi = np.percentile(finite, [2.5, 50, 97.5])
    spread = float(np.std(finite, ddof=1)) if finite.size > 1 else float("nan")
    return {"k": draws, "n_failed": int(draws.size - finite.size), "median": float(med),
            "interval95": [float(lo), float(hi)], "spread": spread, "bias": float(med - k_true),
            "bias_sigma": float((med - k_true) / spread) if spread > 0 else float("nan"),
            "p_value": predictive_p(k_observed, finite),
            "p_value_empirical": two_sided_mc_p(k_observed, finite)}
