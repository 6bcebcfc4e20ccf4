"""Figures of a fit: corner plot, the mass relation per sample, offsets against redshift."""

import numpy as np

from . import style
from .style import plt

style.apply()

#: Samples larger than this are drawn as points without error bars in the relation figure.
MAX_ERROR_BARS = 1000


# parameter -> (mathtext symbol, unit); log-masses and their offsets are in dex (log10 Msun)
_AXIS_SYMBOLS = {"k": ("$k$", None), "alpha": (r"$\alpha$", r"log$_{10}$ M$_\odot$"), "beta": (r"$\beta$", None),
                 "gamma": (r"$\gamma$", None), "sigma_int": (r"$\sigma_\mathrm{int}$", "dex"),
                 "delta": (r"$\delta$", "dex"), "delta_host": (r"$\delta_\mathrm{host}$", "dex"),
                 "f_out": (r"$f_\mathrm{out}$", None), "sigma_out": (r"$\sigma_\mathrm{out}$", "dex")}


def parameter_axis_label(name):
    r"""Axis label of a model parameter: its symbol, the sample/method tag, its unit.

    ``sigma_int[local]`` gives ``$\sigma_\mathrm{int}$[local] (dex)``; a tag's ``$`` is escaped so that
    text from the data never turns into mathtext; unknown names are shown as given.
    """
    base, _, tag = str(name).partition("[")
    symbol, unit = _AXIS_SYMBOLS.get(base, (base.replace("$", r"\$"), None))
    label = symbol + (f"[{tag.rstrip(']')}]".replace("$", r"\$") if tag else "")
    return f"{label} ({unit})" if unit else label


def preload():
    """Import now what the figures import when first drawn (corner.py; matplotlib comes with this
    module), and draw one small figure with mathtext, which builds matplotlib's mathtext parser and
    loads the fonts (about 0.4 s on first use), e.g. in a process that draws later."""
    import io

    import corner  # noqa: F401

    fig = plt.figure(figsize=(1.0, 1.0))
    fig.text(0.5, 0.5, r"$\sigma_\mathrm{int} = 0.3_{-0.1}^{+0.1}$ (dex)")
    fig.savefig(io.BytesIO(), format="png")
    plt.close(fig)


def corner_figure(samples, names, path, truths=None):
    """Corner plot of the posterior draws (corner.py), k first; axes named by symbol and unit."""
    import corner

    labels = [parameter_axis_label(n) for n in names]
    titles = [label.rsplit(" (", 1)[0] for label in labels]  # symbol only above each histogram
    fig = corner.corner(samples, labels=labels, titles=titles, truths=truths, quantiles=[0.16, 0.5, 0.84],
                        show_titles=True, title_fmt=".3f", color=style.PALETTE[0],
                        truth_color=style.PALETTE[4], hist_kwargs={"linewidth": 1.2})
    style.save(fig, path)


def _median_params(summary):
    return {name: row["median"] for name, row in summary["parameters"].items()}


def relation_figure(catalog, summary, options, path):
    """log M_BH against log M*, coloured by sample, with the fitted relation at each sample's redshift."""
    params = _median_params(summary)
    beta = params.get("beta", 1.0)
    fig, ax = plt.subplots(figsize=(6.2, 4.6))
    grid = np.linspace(catalog.log_mstar.min() - 0.1, catalog.log_mstar.max() + 0.1, 50)
    for i, name in enumerate(catalog.sample_names):
        sel = catalog.sample == name
        z_med = float(np.median(catalog.z[sel]))
        label = f"{name} (median z = {z_med:.2f})"
        if sel.sum() <= MAX_ERROR_BARS:
            ax.errorbar(catalog.log_mstar[sel], catalog.log_mbh[sel], xerr=catalog.log_mstar_err[sel],
                        yerr=catalog.log_mbh_err[sel], fmt="o", ms=3, alpha=0.55, elinewidth=0.5,
                        color=style.colour(i), label=label)
        else:  # error bars of thousands of points hide the data and take seconds to draw
            ax.scatter(catalog.log_mstar[sel], catalog.log_mbh[sel], s=2, alpha=0.3, lw=0,
                       color=style.colour(i), rasterized=True, label=f"{label}, error bars omitted")
        x = np.log10((1 + z_med) / (1 + options.z_ref))
        line = (params["alpha"] + beta * (grid - options.log_mstar_pivot)
                - (params["k"] - beta * options.host_growth) * x)
        ax.plot(grid, line, color=style.colour(i), lw=2)
    ax.set_xlabel(r"host stellar mass  $\log_{10}(M_*/M_\odot)$")
    ax.set_ylabel(r"black-hole mass  $\log_{10}(M_\mathrm{BH}/M_\odot)$")
    ax.set_title("Fitted relation drawn at each sample's median redshift")
    ax.legend(fontsize=8, loc=style.legend_place(ax, catalog.log_mstar, catalog.log_mbh))
    style.save(fig, path)


def offsets_figure(catalog, summary, samples_k, options, path, method_offsets=None, host_offsets=None):
    """Each object's offset from the reference-epoch relation against redshift, with -k log(1+z);
    the fitted mass-method and host-type offsets ({label: dex}) are taken out first."""
    params = _median_params(summary)
    beta = params.get("beta", 1.0)
    method_offsets, host_offsets = method_offsets or {}, host_offsets or {}
    delta = np.array([method_offsets.get(m, 0.0) + host_offsets.get(h, 0.0)
                      for m, h in zip(catalog.method, catalog.host_type)])
    offset = (catalog.log_mbh - delta - params["alpha"]
              - beta * (catalog.log_mstar - options.log_mstar_pivot))
    fig, ax = plt.subplots(figsize=(6.2, 4.2))
    for i, name in enumerate(catalog.sample_names):
        sel = catalog.sample == name
        ax.scatter(catalog.z[sel], offset[sel], s=8, alpha=0.4, color=style.colour(i), label=name)
        ax.errorbar(np.median(catalog.z[sel]), np.mean(offset[sel]),
                    yerr=np.std(offset[sel], ddof=1) / np.sqrt(sel.sum()), fmt="D", ms=7,
                    color=style.colour(i), mec=style.INK, capsize=3)
    z = np.linspace(0, catalog.z.max() * 1.05, 100)
    x = np.log10((1 + z) / (1 + options.z_ref))
    draws = np.asarray(samples_k)[:, None] - beta * options.host_growth
    curves = -draws * x[None, :]
    lo, mid, hi = np.percentile(curves, [16, 50, 84], axis=0)
    ax.fill_between(z, lo, hi, color=style.INK, alpha=0.15, lw=0, label="posterior 68 %")
    ax.plot(z, mid, color=style.INK, lw=1.8, label=r"$-k\,\log_{10}(1+z)$")
    ax.axhline(0, color="0.6", lw=0.8, ls=":", label="no offset")
    ax.set_xlabel("redshift z")
    ax.set_ylabel(r"offset from reference relation (dex)")
    ax.set_title("Black-hole mass offsets against redshift (diamonds: sample means)")
    ax.legend(fontsize=8, ncol=2, loc=style.legend_place(ax, catalog.z, offset))
    style.save(fig, path)
