"""Figures of an injection-recovery campaign: recovery, coverage against k, SBC rank histogram."""

import numpy as np
from scipy import stats

from . import style
from .style import plt

style.apply()


def recovery_figure(results, summary, path):
    """Recovered against injected k per estimator: every mock (jittered), median and 16-84 %
    spread of the estimates per grid point, and the 1:1 line."""
    fig, ax = plt.subplots(figsize=(6.2, 4.8))
    grid = [float(k) for k in summary["campaign"]["grid"]["k"]]
    rows = results[results["kind"] == "grid"]
    estimators = summary["estimators"]
    spacing = np.min(np.diff(sorted(grid))) if len(grid) > 1 else 1.0
    offsets = np.linspace(-0.12, 0.12, len(estimators)) * spacing if len(estimators) > 1 else [0.0]
    rng = np.random.default_rng(0)  # jitter only: not part of any result
    for i, name in enumerate(estimators):
        mine = rows[(rows["estimator"] == name) & np.isfinite(rows["k_estimate"])]
        x = mine["k_true"].to_numpy() + offsets[i]
        ax.scatter(x + rng.uniform(-0.03, 0.03, len(x)) * spacing, mine["k_estimate"], s=4,
                   alpha=0.15, color=style.colour(i), lw=0)
        medians, lows, highs = [], [], []
        for k in grid:
            values = mine["k_estimate"][mine["k_true"] == k].to_numpy()
            q = np.percentile(values, [16, 50, 84]) if len(values) else [np.nan] * 3
            lows.append(q[0])
            medians.append(q[1])
            highs.append(q[2])
        medians = np.array(medians)
        ax.errorbar(np.array(grid) + offsets[i], medians,
                    yerr=[medians - np.array(lows), np.array(highs) - medians], fmt="o", ms=6,
                    capsize=3, color=style.colour(i), mec=style.INK, label=f"{name}: median, 16–84 %")
    span = np.array([min(grid) - 0.5 * spacing, max(grid) + 0.5 * spacing])
    ax.plot(span, span, color=style.INK, lw=1, ls="--", label="1:1 (unbiased)")
    ax.set_xlabel("injected k")
    ax.set_ylabel("recovered k")
    ax.set_title(f"Injection-recovery ({summary['mode']} estimator)")
    ax.legend(fontsize=8)
    style.save(fig, path)


def coverage_figure(summary, path):
    """Coverage of the 68 % and 95 % intervals against injected k, with binomial error bars and
    the nominal level's binomial 1σ and 3σ bands."""
    fig, axes = plt.subplots(1, 2, figsize=(9.0, 3.8), sharex=True)
    for ax, level in zip(axes, ("68", "95")):
        nominal = None
        for i, name in enumerate(summary["estimators"]):
            blocks = [b for b in summary["recovery"][name] if b.get("n")]
            if not blocks:
                continue
            k = np.array([b["k_injected"] for b in blocks])
            cov = np.array([b[f"coverage{level}"] for b in blocks])
            err = np.array([b[f"coverage{level}_error"] for b in blocks])
            n = np.array([b["n"] for b in blocks])
            nominal = blocks[0][f"coverage{level}_nominal"]
            shift = (i - (len(summary["estimators"]) - 1) / 2) * 0.06
            ax.errorbar(k + shift, cov, yerr=err, fmt="o", capsize=3, color=style.colour(i),
                        mec=style.INK, label=name)
        if nominal is not None:
            grid = np.array(sorted(b["k_injected"] for b in blocks))
            band = np.sqrt(nominal * (1 - nominal) / np.max(n))
            for width, alpha in ((3, 0.12), (1, 0.22)):
                ax.fill_between(grid, nominal - width * band, nominal + width * band,
                                color=style.INK, alpha=alpha, lw=0,
                                label=f"nominal ± {width}σ binomial" if width == 3 else None)
            ax.axhline(nominal, color=style.INK, lw=1, label="nominal level")
        ax.set_title(f"{level} % intervals")
        ax.set_xlabel("injected k")
        ax.set_ylabel("coverage (fraction of mocks)")
    axes[0].legend(fontsize=8)
    style.save(fig, path)


def sbc_figure(summary, path):
    """Histogram of SBC ranks per estimator with the uniform expectation and its 99 % band."""
    blocks = summary.get("sbc") or {}
    fig, axes = plt.subplots(1, max(1, len(blocks)), figsize=(4.6 * max(1, len(blocks)), 3.6),
                             squeeze=False)
    for ax, (i, (name, block)) in zip(axes[0], enumerate(blocks.items())):
        counts = np.asarray(block["counts"])
        bins = len(counts)
        edges = np.arange(bins + 1) * block["ranks_per_bin"]
        ax.bar(edges[:-1], counts, width=block["ranks_per_bin"], align="edge",
               color=style.colour(i), alpha=0.8, edgecolor="white")
        expected = block["expected_per_bin"]
        lo, hi = stats.binom.ppf([0.005, 0.995], block["n"], 1.0 / bins) if block["n"] else (0, 0)
        ax.axhspan(lo, hi, color=style.INK, alpha=0.12, lw=0, label="uniform, 99 % band")
        ax.axhline(expected, color=style.INK, lw=1, label="uniform expectation")
        p = block.get("p_value")
        ax.set_title(f"{name}: χ² p = {p:.3g}" if p is not None else name)
        ax.set_xlabel(f"rank of the true k among {block['n_draws']} posterior draws")
        ax.set_ylabel("mocks")
        style.integer_counts(ax)
        ax.legend(fontsize=8)
    if not blocks:
        axes[0][0].text(0.5, 0.5, "no SBC in this campaign", ha="center", va="center")
        axes[0][0].set_axis_off()
    style.save(fig, path)
