"""Figures of the dark-energy budget and of the stellar-remnant test, in the house style
(`report.style`: palette, ink, label sizes, no top/right spines), every axis labelled with its unit.
"""

import numpy as np

from ..consequences.remnants import birth_mass
from . import style
from .style import plt

style.apply()

_BH, _DE, _GREY = style.PALETTE[0], style.PALETTE[4], style.PALETTE[3]


def _null_formatter():
    from matplotlib.ticker import NullFormatter

    return NullFormatter()


def _plain_log_ticks(axis):
    """Tick labels of a log axis as plain numbers (2, 5, 10) rather than 2×10⁰."""
    from matplotlib.ticker import FuncFormatter

    plain = FuncFormatter(lambda value, _: f"{value:g}")
    axis.set_major_formatter(plain)
    axis.set_minor_formatter(plain)


def plot_budget(curve, path, *, title=None):
    """Density and effective equation of state of the coupled population against redshift.

    Parameters
    ----------
    curve : dict of arrays, as made by `cosmogrow.consequences.budget.budget_curve`: z, rho_bh_physical (+ _p16,
        _p84), w_eff (+ _p16, _p84), rho_de_physical; densities in Msun Mpc^-3
    path : str or Path, PNG file to write
    title : str, optional
    """
    z = np.asarray(curve["z"], dtype=float)
    x = 1.0 + z
    fig, (top, bottom) = plt.subplots(2, 1, sharex=True, figsize=(6.0, 6.4),
                                      gridspec_kw={"height_ratios": [3, 2], "hspace": 0.06})
    rho = np.asarray(curve["rho_bh_physical"], dtype=float)
    lo = np.asarray(curve.get("rho_bh_physical_p16", rho), dtype=float)
    hi = np.asarray(curve.get("rho_bh_physical_p84", rho), dtype=float)
    shown = rho > 0
    if np.any(hi > lo):
        top.fill_between(x[shown], lo[shown], hi[shown], color=_BH, alpha=0.25, linewidth=0,
                         label="black holes, 68 % interval")
    top.plot(x[shown], rho[shown], color=_BH, linewidth=2.0, label="coupled black holes")
    top.plot(x, curve["rho_de_physical"], color=_DE, linewidth=2.0, linestyle="--",
             label="dark energy")
    top.set_xscale("log")
    top.set_yscale("log")
    top.set_ylabel(r"physical density (M$_\odot$ Mpc$^{-3}$)")
    top.legend(fontsize=9, loc="best")
    if title:
        top.set_title(title)
    w = np.asarray(curve["w_eff"], dtype=float)
    w_lo = np.asarray(curve.get("w_eff_p16", w), dtype=float)
    w_hi = np.asarray(curve.get("w_eff_p84", w), dtype=float)
    finite = np.isfinite(w)
    if np.any(w_hi[finite] > w_lo[finite]):
        bottom.fill_between(x[finite], w_lo[finite], w_hi[finite], color=_BH, alpha=0.25, linewidth=0)
    bottom.plot(x[finite], w[finite], color=_BH, linewidth=2.0)
    bottom.axhline(-1.0, color=_DE, linestyle="--", linewidth=1.4, label=r"$w = -1$")
    if np.any(finite):
        low = max(np.nanmin(w_lo[finite]), -4.0)
        high = min(np.nanmax(w_hi[finite]), 1.0)
        bottom.set_ylim(min(low, -1.2) - 0.1, max(high, -0.8) + 0.1)
    bottom.set_xlabel(r"$1 + z$")
    ticks = [t for t in (1, 1.5, 2, 3, 5, 7, 10, 15, 20, 30, 50, 100) if x.min() <= t <= x.max()]
    bottom.set_xticks(ticks)
    bottom.set_xticklabels([f"{t:g}" for t in ticks])
    bottom.xaxis.set_minor_formatter(_null_formatter())
    bottom.set_ylabel(r"$w_{\rm eff}$")
    bottom.legend(fontsize=9, loc="best")
    style.save(fig, path)


def plot_remnants(catalog, path, *, limit, k=None, k_band=None, k_max=None, k_range=None):
    """Birth mass against k for each black hole, with the neutron-star limit.

    Parameters
    ----------
    catalog : cosmogrow.remnants.RemnantCatalog
    path : str or Path, PNG file to write
    limit : float, Msun, least birth mass of a black hole
    k : float, optional, the k evaluated (vertical line)
    k_band : (float, float), optional, an interval of k to shade (e.g. a posterior's 68 %)
    k_max : float, optional, largest k allowed at 95 % (dotted vertical line)
    k_range : (float, float), optional, horizontal extent; default 0 to a little past the others
    """
    marks = [v for v in (k, k_max) if v is not None and np.isfinite(v)]
    if k_band is not None:
        marks.extend(k_band)
    if k_range is None:
        k_range = (min([0.0] + marks), max([4.0] + [m + 1.0 for m in marks]))
    grid = np.linspace(k_range[0], k_range[1], 200)
    centre = birth_mass(catalog.mass, catalog.z_obs, catalog.z_form, grid)
    spread = birth_mass(catalog.mass_err, catalog.z_obs, catalog.z_form, grid)
    fig, ax = plt.subplots(figsize=(6.0, 4.2))
    if k_band is not None:
        ax.axvspan(k_band[0], k_band[1], color=_GREY, alpha=0.2, linewidth=0, label="k, 68 % interval")
    for i, name in enumerate(catalog.ids):
        colour = style.colour(i + 1)
        lower = np.maximum(centre[:, i] - spread[:, i], 1e-3 * centre[:, i])  # log axis: stay positive
        ax.fill_between(grid, lower, centre[:, i] + spread[:, i], color=colour,
                        alpha=0.15, linewidth=0)
        ax.plot(grid, centre[:, i], color=colour, linewidth=1.8, label=str(name))
    ax.axhline(limit, color=style.INK, linewidth=1.6, linestyle="--",
               label=f"limit {limit:g} M$_\\odot$")
    if k is not None:
        ax.axvline(k, color=style.INK, linewidth=1.4, label=f"k = {k:.3g}")
    if k_max is not None and np.isfinite(k_max):
        ax.axvline(k_max, color=style.INK, linewidth=1.6, linestyle=":", label=f"k$_{{max}}$ (95 %) = {k_max:.3g}")
    ax.set_yscale("log")
    _plain_log_ticks(ax.yaxis)
    ax.set_xlim(*k_range)
    ax.set_xlabel("coupling exponent k")
    ax.set_ylabel(r"birth mass (M$_\odot$)")
    ax.legend(fontsize=8, loc="upper left", bbox_to_anchor=(1.01, 1.0))
    style.save(fig, path)
