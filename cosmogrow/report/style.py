"""The house look of cosmogrow's figures: print-friendly, colour-blind-safe, labelled with units."""

import matplotlib

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


def colour(i):
    return PALETTE[i % len(PALETTE)]


def save(fig, path):
    """Write a figure and close it."""
    fig.savefig(path)
    plt.close(fig)
