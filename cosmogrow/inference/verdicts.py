"""Verdicts on reference values of k and what they rest on (docs/method.md#verdicts).

A verdict on a reference k (0, 3, a claimed value) is one of three words:

- "excluded": the significance against it reaches the threshold (3σ by default) with the offset
  constraints at ⅓×, 1× and 3× their configured width;
- "consistent": it stays below the threshold at all three widths;
- "depends on assumptions": the three widths fall on both sides of the threshold. The reason then
  names the width where the verdict flips.

The significance with the offsets unconstrained (the data alone) is reported for information and
never decides. Everything here is pure: numbers in, words and numbers out, so that any part of the
package that judges a reference k (the fit, the challenge of a claim) uses the same rules.
"""

import math

import numpy as np
from scipy import stats

from ..errors import ConfigError

EXCLUDED = "excluded"
CONSISTENT = "consistent"
DEPENDS = "depends on assumptions"
VERDICTS = (EXCLUDED, CONSISTENT, DEPENDS)
DEFAULT_THRESHOLD = 3.0
#: Offset-constraint widths, as multiples of the configured width, that decide a verdict.
WIDTH_SCALES = (1.0 / 3.0, 1.0, 3.0)


def sigma_from_p(p_value):
    """Equivalent Gaussian significance of a two-sided p-value: Φ⁻¹(1 − p/2).

    Parameters
    ----------
    p_value : float in [0, 1]

    Returns
    -------
    float, σ (inf for p = 0)
    """
    return float(stats.norm.isf(0.5 * float(p_value)))


def p_from_sigma(sigma):
    """Two-sided p-value of an equivalent Gaussian significance: 2 (1 − Φ(σ))."""
    return float(2.0 * stats.norm.sf(abs(float(sigma))))


def classify(sigmas, threshold=DEFAULT_THRESHOLD):
    """The verdict word for significances computed under several assumptions.

    Parameters
    ----------
    sigmas : iterable of float
        Significances (σ) against one reference k, one per assumption (e.g. the offset constraint
        at ⅓×, 1×, 3× its width). NaN entries are ignored; +inf counts as above any threshold.
    threshold : float, σ at and above which a value counts as excluded

    Returns
    -------
    str, one of VERDICTS ("depends on assumptions" when no significance is usable)
    """
    values = [float(s) for s in sigmas if s is not None and not math.isnan(float(s))]
    if not values:
        return DEPENDS
    above = [s >= threshold for s in values]
    if all(above):
        return EXCLUDED
    if not any(above):
        return CONSISTENT
    return DEPENDS


def flip_width(widths, sigmas, threshold=DEFAULT_THRESHOLD):
    """Width where the significance crosses the threshold (first crossing, widths ascending).

    Interpolates σ linearly in log(width) between the two neighbouring widths that straddle the
    threshold.

    Parameters
    ----------
    widths : sequence of float, ascending, > 0 (dex, or scale factors of the configured widths)
    sigmas : sequence of float, σ at each width

    Returns
    -------
    float or None (no crossing)
    """
    for (w0, s0), (w1, s1) in zip(zip(widths, sigmas), zip(widths[1:], sigmas[1:])):
        if (s0 >= threshold) == (s1 >= threshold):
            continue
        if not (np.isfinite(s0) and np.isfinite(s1)) or s0 == s1:
            return float(w0 if not np.isfinite(s1) else w1)
        fraction = (threshold - s0) / (s1 - s0)
        return float(np.exp(np.log(w0) + fraction * (np.log(w1) - np.log(w0))))
    return None


def _width_text(scale, base_width):
    if base_width is None:
        return f"{scale:.2g}× their configured widths"
    return f"N(0, {scale * base_width:.2g} dex)"


def _sigma_text(sigma):
    return "∞σ" if not np.isfinite(sigma) else f"{sigma:.1f}σ"


def judge(k_ref, sigmas, *, scales=WIDTH_SCALES, base_width=None, threshold=DEFAULT_THRESHOLD,
          sigma_unconstrained=None, what="the offsets"):
    """The verdict on one reference k from its significances under the offset constraints.

    Parameters
    ----------
    k_ref : float, the reference coupling exponent
    sigmas : sequence of float
        σ against k_ref with the offset constraints at each of `scales` × the configured width
        (one value when the model has no offset: the verdict then rests on the data and model).
    scales : sequence of float, ascending; the middle entry 1 is the configuration
    base_width : float or None
        The configured width in dex when all offsets share one; None words the widths as scales.
    threshold : float, σ
    sigma_unconstrained : float or None, σ with the offsets unconstrained (the data alone)
    what : str, what is constrained (for the sentence)

    Returns
    -------
    dict: k_ref, verdict, sigma (at the configured width), sigma_range [min, max], reason (one
    sentence), threshold, sigma_unconstrained and data_alone (a sentence, or None).
    """
    sigmas = [float(s) for s in sigmas]
    scales = list(scales)[:len(sigmas)] if len(sigmas) > 1 else [1.0]
    configured = sigmas[scales.index(1.0)] if 1.0 in scales else sigmas[len(sigmas) // 2]
    verdict = classify(sigmas, threshold)
    finite = [s for s in sigmas if not math.isnan(s)]
    low, high = (min(finite), max(finite)) if finite else (float("nan"), float("nan"))
    subject = f"k = {k_ref:g}"
    if len(sigmas) == 1:
        word = "is excluded" if verdict == EXCLUDED else "is not excluded"
        reason = (f"{subject} {word} at {threshold:g}σ ({_sigma_text(configured)}); the model has "
                  f"no offset parameter, so this rests on the data and the model alone.")
    elif verdict == DEPENDS:
        flip = flip_width(scales, sigmas, threshold)
        tighter = sigmas[0] >= sigmas[-1]
        listing = ", ".join(f"{_sigma_text(s)} at {_width_text(c, base_width)}"
                            for c, s in zip(scales, sigmas))
        reason = (f"{subject} is excluded at {threshold:g}σ only if {what} are constrained to "
                  f"{_width_text(flip, base_width)} or {'tighter' if tighter else 'looser'} "
                  f"({listing}).")
    else:
        word = "excluded at" if verdict == EXCLUDED else "within"
        reason = (f"{subject} is {word} {threshold:g}σ whether {what} are constrained to "
                  f"{_width_text(scales[0], base_width)} or {_width_text(scales[-1], base_width)} "
                  f"({_sigma_text(low)} to {_sigma_text(high)}).")
    return {"k_ref": float(k_ref), "verdict": verdict, "sigma": configured,
            "sigma_range": [low, high], "reason": reason, "threshold": float(threshold),
            "sigma_unconstrained": None if sigma_unconstrained is None else float(sigma_unconstrained),
            "data_alone": data_alone_sentence(sigma_unconstrained, threshold, what)}


def data_alone_sentence(sigma_unconstrained, threshold=DEFAULT_THRESHOLD, what="the offsets"):
    """"The data alone do / do not exclude it" with the unconstrained significance (or None)."""
    if sigma_unconstrained is None or math.isnan(float(sigma_unconstrained)):
        return None
    word = "do" if sigma_unconstrained >= threshold else "do not"
    return (f"With {what} unconstrained, the data alone {word} exclude it at {threshold:g}σ "
            f"({_sigma_text(float(sigma_unconstrained))}).")


def verdicts_from_rows(rows, k_refs, threshold=DEFAULT_THRESHOLD, base_width=None,
                       what="the offsets"):
    """One verdict per reference k from the sensitivity rows of a fit.

    Parameters
    ----------
    rows : list of dict
        Sensitivity rows; those with setting "offset_width_scale" (value = scale) and
        "offsets_unconstrained" are used, each with ``sigma_by_k`` {str(k_ref): σ}. A fit without
        offsets has one row with setting "as_configured".
    k_refs : sequence of float
    threshold, base_width, what : as in `judge`

    Returns
    -------
    list of dict (see `judge`), in the order of k_refs
    """
    scaled = sorted((row for row in rows if row["setting"] == "offset_width_scale"),
                    key=lambda row: row["value"])
    if not scaled:
        scaled = [row for row in rows if row["setting"] == "as_configured"]
    free = next((row for row in rows if row["setting"] == "offsets_unconstrained"), None)
    out = []
    for k_ref in k_refs:
        key = k_key(k_ref)
        sigmas = [row["sigma_by_k"][key] for row in scaled]
        out.append(judge(k_ref, sigmas, scales=[row.get("value", 1.0) for row in scaled],
                         base_width=base_width, threshold=threshold, what=what,
                         sigma_unconstrained=None if free is None else free["sigma_by_k"][key]))
    return out


def k_key(k_ref):
    """The dictionary key of a reference k ("0", "3", "1.5")."""
    return f"{float(k_ref):g}"


def headline(verdicts):
    """The lead sentence of a fit's summary: the verdict words first, σ only when they do not depend
    on assumptions.

    Parameters
    ----------
    verdicts : list of dict from `judge`

    Returns
    -------
    str
    """
    parts = []
    for row in verdicts:
        head = f"k = {row['k_ref']:g}: {row['verdict']}"
        if row["verdict"] == DEPENDS:
            low, high = row["sigma_range"]
            parts.append(f"{head} ({_sigma_text(low)} to {_sigma_text(high)} as the offset "
                         f"constraint varies)")
        else:
            parts.append(f"{head} ({_sigma_text(row['sigma'])})")
    return "; ".join(parts) + "." if parts else ""


def verdict_options(table=None, source="<config>", *, claims=None, threshold=None):
    """The verdict settings of a run: the `[verdicts]` table of a configuration, command-line
    values winning.

    Parameters
    ----------
    table : dict, optional, keys ``threshold`` (σ, > 0) and ``claims`` (list of k values)
    source : str, the configuration file (for messages)
    claims : list of float, optional, from ``fit --claim`` (added to the table's)
    threshold : float, optional, from ``fit --threshold``

    Returns
    -------
    dict {threshold: float, k_refs: [0, 3, claims...] without repeats}
    """
    table = dict(table or {})
    unknown = sorted(set(table) - {"threshold", "claims"})
    if unknown:
        raise ConfigError(f"{source}: unknown key 'verdicts.{unknown[0]}'; expected one of claims, threshold")
    value = table.get("threshold", DEFAULT_THRESHOLD) if threshold is None else threshold
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not 0 < value < 40:
        raise ConfigError(f"{source}: verdicts.threshold: expected a number of σ in (0, 40), got {value!r}")
    listed = table.get("claims", [])
    if not isinstance(listed, list):
        raise ConfigError(f"{source}: verdicts.claims: expected a list of k values, got {listed!r}")
    refs = []
    for k_ref in [0.0, 3.0] + list(listed) + list(claims or []):
        if isinstance(k_ref, bool) or not isinstance(k_ref, (int, float)) or not math.isfinite(k_ref):
            raise ConfigError(f"{source}: verdicts.claims: expected finite numbers, got {k_ref!r}")
        if float(k_ref) not in refs:
            refs.append(float(k_ref))
    return {"threshold": float(value), "k_refs": refs}
