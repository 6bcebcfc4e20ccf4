"""Identifiability guards of a fit (docs/method.md#verdicts): is k identified by these data at all?

k is flagged as not identified when its posterior fills more than half of its prior range, piles
up at an edge of that range, or when every object sits at one redshift (no lever arm). A fit with
every sample's mass method undeclared across samples at different redshifts is warned about: any
calibration or host-type difference between the samples is then absorbed into k.
"""

import numpy as np

from ..data.catalog import DEFAULT_HOST_TYPE, DEFAULT_METHOD

#: The central 95 % interval of k spanning more than this fraction of the prior range: not identified.
FILL_FRACTION = 0.5
#: More than EDGE_MASS of the draws within EDGE_ZONE × range of an edge: the posterior piles there.
EDGE_ZONE = 0.02
EDGE_MASS = 0.05


def identifiability(k_draws, prior_range, z):
    """Whether k is identified, and why not.

    Parameters
    ----------
    k_draws : ndarray, posterior draws of k
    prior_range : (float, float), the uniform prior range of k
    z : ndarray, redshift of every object

    Returns
    -------
    dict {identified: bool, reasons: [str]}
    """
    reasons = []
    low, high = prior_range
    if np.ptp(np.asarray(z, dtype=float)) <= 1e-9 * max(1.0, float(np.max(z))):
        reasons.append(f"all objects share one redshift (z = {float(np.min(z)):.4g}), so nothing "
                       f"separates growth with redshift from the zero point")
    if np.isfinite(low) and np.isfinite(high):
        width = high - low
        q_low, q_high = np.percentile(k_draws, [2.5, 97.5])
        if q_high - q_low > FILL_FRACTION * width:
            reasons.append(f"the 95 % interval of k [{q_low:.2f}, {q_high:.2f}] fills "
                           f"{(q_high - q_low) / width:.0%} of its prior range [{low:g}, {high:g}]")
        for edge, near in ((low, k_draws < low + EDGE_ZONE * width),
                           (high, k_draws > high - EDGE_ZONE * width)):
            if near.mean() > EDGE_MASS:
                reasons.append(f"{near.mean():.0%} of the posterior of k lies within "
                               f"{EDGE_ZONE:.0%} of the prior edge k = {edge:g}")
    return {"identified": not reasons, "reasons": reasons}


def identifiability_warning(block):
    """The warning line of a failed identifiability check (or None)."""
    if block["identified"]:
        return None
    return ("k is not identified by these data: " + "; ".join(block["reasons"])
            + ". The numbers below describe the prior as much as the data (exit code 3).")


def undeclared_methods_warning(catalog):
    """A warning when no sample declares its mass method but the samples differ in redshift."""
    if len(catalog.sample_names) < 2 or np.any(np.asarray(catalog.method) != DEFAULT_METHOD):
        return None
    medians = {name: float(np.median(catalog.z[catalog.sample == name])) for name in catalog.sample_names}
    if max(medians.values()) - min(medians.values()) <= 0:
        return None
    ranges = ", ".join(f"{name} at z ≈ {value:.2g}" for name, value in medians.items())
    typed = np.any(np.asarray(catalog.host_type) != DEFAULT_HOST_TYPE)
    assumed = "one calibration" if typed else "one calibration and one host type"
    absorbed = "calibration" if typed else "calibration or host-type"
    return (f"no sample declares its black-hole mass method ({ranges}): the fit assumes all masses "
            f"share {assumed}, so any {absorbed} difference between the samples is absorbed into k. "
            f"Declare a method column or sample.method.")
