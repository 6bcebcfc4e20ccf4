"""Figure of a forecast (docs/method.md#forecast): σ_k and power against size; the degeneracy breaker."""

import numpy as np

from . import style
from .style import plt

style.apply()

_BREAKER_LINES = (("sigma_k_narrow", "offset priors ×⅓", ":"), ("sigma_k", "offset priors as planned", "-"),
                  ("sigma_k_wide", "offset priors ×3", "--"), ("sigma_k_free", "no offset prior", "-."))


def _finite(rows, key):
    """A column of scan rows as floats; None and infinite values (not measurable) become NaN."""
    values = np.array([np.nan if row.get(key) is None else row[key] for row in rows], dtype=float)
    return np.where(np.isfinite(values), values, np.nan)


def forecast_figure(result, path):
    """Three panels: σ_k against the total size (with the mocks' spread at the planned size), the
    power to exclude k = 0 and k = 3 against it, and σ_k against the size of the degeneracy breaker.

    Parameters
    ----------
    result : dict, the content of forecast.json
    path : output file (PNG)
    """
    scans = result["scans"]
    rows = scans["n_all"]
    n_total = _finite(rows, "n_total")
    fig, axes = plt.subplots(1, 3, figsize=(12.0, 3.7))
    ax = axes[0]
    ax.loglog(n_total, _finite(rows, "sigma_k"), "o-", color=style.colour(0), label="forecast (Fisher)")
    planned = sum(sample["n"] for sample in result["samples"].values())
    check = result.get("check") or {}
    if check.get("std") is not None:
        ax.errorbar([planned], [check["std"]], yerr=[check["std_error"]], fmt="s", color=style.colour(1),
                    label=f"spread of {check['n']} mocks")
    ax.axvline(planned, color=style.INK, lw=0.8, alpha=0.5)
    ax.set_xlabel("objects in the plan, all samples scaled")
    ax.set_ylabel("σ(k)")
    ax.legend(fontsize=8)
    ax = axes[1]
    threshold = result["threshold_sigma"]
    for i, (key, label) in enumerate((("power_exclude_k0", "exclude k = 0"), ("power_exclude_k3", "exclude k = 3"))):
        ax.semilogx(n_total, _finite(rows, key), "o-", color=style.colour(i + 2), label=label)
    ax.axvline(planned, color=style.INK, lw=0.8, alpha=0.5)
    ax.set_ylim(-0.02, 1.02)
    ax.set_xlabel("objects in the plan, all samples scaled")
    ax.set_ylabel(f"power at {threshold:g}σ (true k = {result['k_true']:g})")
    ax.legend(fontsize=8)
    _breaker_panel(axes[2], result)
    fig.tight_layout()
    style.save(fig, path)


def _breaker_panel(ax, result):
    rows = result["scans"]["breaker"]
    degeneracy = result["degeneracy"]
    n = _finite(rows, "n")
    x = np.where(n > 0, n, 0.5 * np.min(n[n > 0]) if np.any(n > 0) else 1.0)
    for i, (key, label, line) in enumerate(_BREAKER_LINES):
        ax.semilogx(x, _finite(rows, key), line, marker="o", ms=3, color=style.colour(i), label=label)
    ax.set_xlabel(f"objects in '{degeneracy['anchor']}' ({degeneracy['method']}, local); leftmost: none")
    ax.set_ylabel("σ(k)")
    ax.set_yscale("log")
    ax.set_title("breaking the k–offset degeneracy", fontsize=10)
    ax.legend(fontsize=7)
