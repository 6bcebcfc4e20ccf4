"""The house look of cosmogrow's figures: print-friendly, colour-blind-safe, labelled with units."""

import matplotlib
import numpy as np

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

# An ordered palette chosen for this tool: deep teal, ochre, plum, slate, brick, olive.
PALETTE = ("#1b6f7a", "#c48a1c", "#7d4e8f", "#4a5a6a", "#a8452f", "#6b7d2a")
INK = "#22272e"


def apply():
    """Set the rc parameters every cosmogrow figure uses."""
    plt.rcParams.update({
        "figure.dpi": 110, "savefig.dpi": 150, "font.size": 10, "axes.titlesize": 11,
        "axes.labelsize": 10, "axes.edgecolor": INK, "axes.labelcolor": INK, "xtick.color": INK,
        "ytick.color": INK, "axes.spines.top": False, "axes.spines.right": False,
        "axes.prop_cycle": matplotlib.cycler(color=PALETTE), "legend.frameon": False,
        "savefig.bbox": "tight",
    })


def integer_counts(ax, axis="y"):
    """Ticks at whole numbers only on an axis of counts (mocks, objects)."""
    from matplotlib.ticker import MaxNLocator

    getattr(ax, f"{axis}axis").set_major_locator(MaxNLocator(integer=True))


def legend_place(ax, x, y, limit=2000):
    """Where a legend goes: matplotlib's "best" for up to `limit` points; above, the corner of the
    axes (40 % of each side) holding the fewest of the points (x, y) in data coordinates. The
    "best" search costs points x candidate places: 8 s at 1e6 points, 0.05 s for this count."""
    x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    if x.size <= limit:
        return "best"
    (x0, x1), (y0, y1) = ax.get_xlim(), ax.get_ylim()
    u, v = (x - x0) / (x1 - x0), (y - y0) / (y1 - y0)
    low_u, high_u, low_v, high_v = u < 0.4, u > 0.6, v < 0.4, v > 0.6
    counts = {"upper left": np.sum(low_u & high_v), "upper right": np.sum(high_u & high_v),
              "lower left": np.sum(low_u & low_v), "lower right": np.sum(high_u & low_v)}
    return min(counts, key=counts.get)


def colour(i):
    return PALETTE[i % len(PALETTE)]


def save(fig, path):
    """Write a figure and close it."""
    fig.savefig(path)
    plt.close(fig)
