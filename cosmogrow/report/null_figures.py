"""Figures of the null tests (one panel per test) and of the survival of a claimed k."""

import numpy as np

from . import style
from .style import plt

style.apply()

_PASS, _FAIL, _SKIP = style.PALETTE[0], style.PALETTE[4], style.PALETTE[3]


def _status(row):
    if row["passed"] is None:
        return "not applicable", _SKIP
    return ("pass", _PASS) if row["passed"] else ("FAIL", _FAIL)


def _histogram(ax, draws, observed, label, colour):
    draws = np.asarray(draws, dtype=float)
    draws = draws[np.isfinite(draws)]
    if draws.size:
        ax.hist(draws, bins=max(8, min(40, draws.size // 4)), color=colour, alpha=0.55, label=label)
    ax.axvline(observed, color=style.INK, lw=2, label="data")
    ax.set_ylabel("count")
    style.integer_counts(ax)


def _errorbars(ax, labels, ks, stds, k_full, std_full):
    y = np.arange(len(labels))
    ax.axvspan(k_full - std_full, k_full + std_full, color=style.INK, alpha=0.12, lw=0)
    ax.axvline(k_full, color=style.INK, lw=1.2, label="all data")
    ax.errorbar(ks, y, xerr=stds, fmt="o", color=style.colour(0), capsize=3)
    ax.set_yticks(y)
    ax.set_yticklabels(labels, fontsize=7)
    ax.set_xlabel("k")


def _panel(ax, row, observed):
    details = row.get("details", {})
    name = row["name"]
    if name == "redshift_permutation":
        _histogram(ax, details["t_permuted"], details["t_observed"], "z shuffled within blocks",
                   style.colour(1))
        ax.set_xlabel("k / σ_k")
    elif name == "reference_split":
        ks, stds = np.asarray(details["k_splits"]), np.asarray(details["k_std_splits"])
        _histogram(ax, ks / stds, 0.0, "splits", style.colour(2))
        ax.lines[-1].set_label("k = 0")
        ax.set_xlabel("k / σ_k of each split")
    elif name == "leave_samples_out":
        rows = details["subsets"]
        _errorbars(ax, ["without " + ", ".join(r["left_out"]) for r in rows], [r["k"] for r in rows],
                   [r["k_std"] for r in rows], observed["k"], observed["k_std"])
    elif name == "host_mass_matching":
        if "k_matched" in details:
            _errorbars(ax, ["matched"], [details["k_matched"]], [details["k_std_matched"]],
                       observed["k"], observed["k_std"])
    elif name == "leave_sources_out":
        rows = details["sources"]
        _errorbars(ax, [f"without {r['left_out']}" for r in rows], [r["k"] for r in rows],
                   [r["k_std"] for r in rows], observed["k"], observed["k_std"])
    elif name == "k0_false_exclusions":
        ks, stds = np.asarray(details["k_mocks"]), np.asarray(details["k_std_mocks"])
        _histogram(ax, ks / stds, 0.0, "k = 0 mocks", style.colour(5))
        ax.lines[-1].set_label("k = 0")
        for edge in (-1.96, 1.96):
            ax.axvline(edge, color=style.INK, lw=0.8, ls=":")
        ax.set_xlabel("k / σ_k of each mock (dotted: 95 % limits)")
    elif name == "single_method":
        rows = details["methods"]
        _errorbars(ax, [f"{r['method']} only" for r in rows], [r["k"] for r in rows],
                   [r["k_std"] for r in rows], observed["k"], observed["k_std"])
    elif name == "k0_with_selection":
        _histogram(ax, details["k_mocks"], details["k_observed"], "k = 0 mocks", style.colour(5))
        ax.set_xlabel("k")


def nulltests_figure(result, path):
    """One panel per null test, titled with its verdict.

    Parameters
    ----------
    result : dict from `cosmogrow.checks.null_suite.run_null_tests`
    path : output file (PNG)
    """
    rows = list(result["tests"].values())
    ncols = 3
    nrows = max(1, int(np.ceil(len(rows) / ncols)))
    fig, axes = plt.subplots(nrows, ncols, figsize=(11.5, 3.4 * nrows), squeeze=False)
    for ax, row in zip(axes.flat, rows):
        word, colour = _status(row)
        p = row.get("p_value")
        ptext = f", p = {p:.2g}" if p is not None else ""
        ax.set_title(f"{row['title']}: {word}{ptext}", color=colour, fontsize=9.5)
        if row["passed"] is None:
            ax.text(0.5, 0.5, row["skipped"], transform=ax.transAxes, ha="center", va="center",
                    fontsize=8, wrap=True)
            ax.set_axis_off()
            continue
        _panel(ax, row, result["observed"])
        ax.legend(fontsize=7)
    for ax in list(axes.flat)[len(rows):]:
        ax.set_axis_off()
    fig.suptitle(f"Null tests (threshold p ≥ {result['alpha']:g}; data: k = {result['observed']['k']:.2f} "
                 f"± {result['observed']['k_std']:.2f})", fontsize=11)
    fig.tight_layout()
    style.save(fig, path)


def challenge_figure(result, path):
    """The four distributions of the estimate (selection-aware / plain fit × claimed k / k = 0).

    Parameters
    ----------
    result : dict from `cosmogrow.checks.challenge.challenge_claim`
    path : output file (PNG)
    """
    fig, axes = plt.subplots(1, 2, figsize=(11.0, 4.0), sharex=True)
    titles = {"selection_aware": "selection-aware fits (the comparison)",
              "plain": "plain fits (bias of ignoring selection)"}
    for ax, estimator in zip(axes, ("selection_aware", "plain")):
        for i, (label, row) in enumerate(result["hypotheses"].items()):
            draws = np.asarray(row[estimator]["k"], dtype=float)
            draws = draws[np.isfinite(draws)]
            colour = style.colour(0 if label == "claim" else 1)
            ax.hist(draws, bins=max(8, min(40, draws.size // 4)), color=colour, alpha=0.5,
                    label=f"mocks at k = {row['k']:g}")
            ax.axvline(row["k"], color=colour, lw=1, ls="--", label=f"true k of these mocks = {row['k']:g}")
        ax.axvline(result["observed"][estimator]["k"], color=style.INK, lw=2.2,
                   label=f"data ({estimator.replace('_', '-')})")
        ax.set_xlabel("estimated k")
        ax.set_title(titles[estimator], fontsize=10)
        ax.legend(fontsize=7)
    axes[0].set_ylabel("mocks")
    for ax in axes:
        style.integer_counts(ax)
    claim, null = result["verdict"]["claim"], result["verdict"]["null"]
    fig.suptitle(f"Claimed k = {result['claim']:g}: {claim['status']} (p = {claim['p_value']:.2g}); "
                 f"k = 0: {null['status']} (p = {null['p_value']:.2g})", fontsize=11)
    fig.tight_layout()
    style.save(fig, path)
