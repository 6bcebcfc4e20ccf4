"""Figure of the distribution-matching cross-check: p-value against k for each two-sample test."""

import numpy as np
from matplotlib.ticker import NullLocator

from . import style
from .style import plt

style.apply()

# scipy.stats.anderson_ksamp interpolates its p-value in a table and caps it to [0.001, 0.25].
AD_CLIP_NOTE = "p-values capped to [0.001, 0.25]\n(scipy's interpolation table)"
_TITLES = {"ks": "Kolmogorov–Smirnov", "anderson_darling": "Anderson–Darling",
           "epps_singleton": "Epps–Singleton"}


def crosscheck_figure(crosscheck, k_summary, path):
    """p(k) of every test (pooled high-z samples thick, single samples thin) beside the posterior.

    Parameters
    ----------
    crosscheck : dict from `cosmogrow.inference.crosscheck.distribution_crosscheck` (may say `skipped`)
    k_summary : dict with the posterior "median" and "interval95" of k, or None
    path : output file (PNG)
    """
    tests = list(_TITLES)
    fig, axes = plt.subplots(1, len(tests), figsize=(11.0, 3.6), sharey=True)
    if not crosscheck or crosscheck.get("skipped"):
        reason = (crosscheck or {}).get("skipped", "no cross-check was run")
        for ax in axes:
            ax.set_axis_off()
        fig.text(0.5, 0.5, f"Cross-check skipped: {reason}", ha="center", va="center", wrap=True)
        style.save(fig, path)
        return
    grid = crosscheck["grid"]
    k = np.asarray(grid["k"], dtype=float)
    threshold = crosscheck.get("p_threshold", 0.05)
    for ax, test in zip(axes, tests):
        if k_summary is not None:
            lo, hi = k_summary["interval95"]
            ax.axvspan(lo, hi, color=style.INK, alpha=0.12, lw=0, label="posterior 95 %")
            ax.axvline(k_summary["median"], color=style.INK, lw=1.2, label="posterior median")
        for i, (name, curves) in enumerate(grid.get("per_sample", {}).items()):
            if len(grid["per_sample"]) > 1:
                ax.plot(k, _clip(curves[test]), color=style.colour(i + 1), lw=0.9, alpha=0.8,
                        label=f"{name} only")
        ax.plot(k, _clip(grid["p"][test]), color=style.colour(0), lw=2.2, label="high-z pooled")
        ax.axhline(threshold, color=style.colour(4), lw=1, ls="--", label=f"p = {threshold:g}")
        row = crosscheck["tests"][test]
        if row.get("skipped"):
            ax.text(0.5, 0.5, f"skipped:\n{row['skipped']}", transform=ax.transAxes, ha="center",
                    va="center", fontsize=8, wrap=True)
        elif row.get("best_k") is not None:
            ax.axvline(row["best_k"], color=style.colour(0), lw=0.8, ls=":", label="best k (pooled)")
        if test == "anderson_darling":
            ax.text(0.02, 0.02, AD_CLIP_NOTE, transform=ax.transAxes, fontsize=7, va="bottom",
                    color=style.INK)
        ax.set_yscale("log")
        ax.yaxis.set_minor_locator(NullLocator())  # 7 decades: minor ticks are clutter, and 40 % of the drawing time
        ax.set_ylim(1e-6, 1.5)
        ax.set_xlabel("coupling exponent k")
        ax.set_title(_TITLES[test])
    axes[0].set_ylabel(f"p-value against reference '{crosscheck['reference']}'")
    axes[-1].legend(fontsize=7, loc="lower right")
    fig.suptitle("Distribution-matching cross-check: high-z samples projected by +k log10[(1+z)/(1+z_ref)]",
                 fontsize=10)
    style.save(fig, path)


def _clip(values):
    values = np.asarray(values, dtype=float)
    return np.clip(np.where(np.isfinite(values), values, np.nan), 1e-6, None)
