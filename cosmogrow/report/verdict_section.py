"""The report's verdict parts of a fit (docs/method.md#verdicts): the verdict words, the sensitivity
of every significance to the assumptions, and what carries the constraint on k.

Reads summary.json defensively (every block optional), like `fit_section`.
"""

from .formatting import Cell, as_float, dig, fmt, fmt_interval, table

DEPENDS = "depends on assumptions"


def verdict_line(summary):
    """The verdict words of a fit in one line (summary['headline']), or None for older summaries."""
    text = dig(summary, "headline")
    return f"Verdicts: {text}" if isinstance(text, str) and text else None


def _verdict_rows(summary):
    rows = dig(summary, "verdicts")
    return [row for row in rows if isinstance(row, dict)] if isinstance(rows, list) else []


def verdict_for(summary, k_ref):
    """The verdict entry of one reference k, or None."""
    for row in _verdict_rows(summary):
        if as_float(dig(row, "k_ref")) == float(k_ref):
            return row
    return None


def sigma_text(summary, k_ref, key=None):
    """σ against k_ref labelled with what constrains the offsets; its range and the verdict words
    beside it whenever the verdict depends on assumptions (never a lone σ then)."""
    tests = dig(summary, "tests", default={})
    value = as_float(dig(tests, key or f"sigma_vs_k{k_ref:g}"))
    if value is None:
        return "–"
    method = dig(tests, "significance_method") or "profile likelihood"
    text = f"{fmt(value, 2)} σ ({method})"
    verdict = verdict_for(summary, k_ref)
    if verdict and dig(verdict, "verdict") == DEPENDS:
        text += (f"; {fmt_interval(dig(verdict, 'sigma_range'), 1)} σ as the offset constraint "
                 f"varies: {DEPENDS}")
    return text


def short_sigma(summary, k_ref):
    """σ against k_ref for a table cell; with its range and "depends" when the verdict does."""
    value = fmt(dig(summary, "tests", f"sigma_vs_k{k_ref:g}"), 2)
    verdict = verdict_for(summary, k_ref)
    if verdict and dig(verdict, "verdict") == DEPENDS:
        return f"{value} ({fmt_interval(dig(verdict, 'sigma_range'), 1)}: {DEPENDS})"
    return value


def verdict_items(summary):
    """One plain line per reference k: the verdict, its reason, what the data alone say."""
    items = []
    for row in _verdict_rows(summary):
        k_ref = as_float(dig(row, "k_ref"))
        parts = [f"k = {'–' if k_ref is None else f'{k_ref:g}'}: {dig(row, 'verdict', default='–')}.",
                 dig(row, "reason"), dig(row, "data_alone")]
        items.append(" ".join(str(part) for part in parts if part))
    info = dig(summary, "information", "text")
    if isinstance(info, str) and info:
        items.append(info)
    return items


def assumptions_table(summary):
    """The sensitivity rows: each assumption, k, both significances, B01 with its prior width."""
    rows = dig(summary, "sensitivity")
    rows = [row for row in rows if isinstance(row, dict)] if isinstance(rows, list) else []
    if not rows:
        return None
    body = []
    for row in rows:
        interval = dig(row, "k_interval68")
        body.append([Cell(str(dig(row, "label", default="–")), "text"), fmt(dig(row, "k_median"), 2),
                     fmt_interval(interval, 2) if interval else "not identified",
                     fmt(dig(row, "sigma_vs_k0"), 2), fmt(dig(row, "sigma_vs_k3"), 2),
                     fmt(dig(row, "bayes_factor_k0"), 3), fmt(dig(row, "k_prior_width"), 0),
                     Cell(str(dig(row, "method", default="")), "text")])
    return table(["assumption", "median k", "68 % interval", "σ against k = 0", "σ against k = 3",
                  "B₀₁", "k prior width W", "how"], body, numeric=range(1, 7),
                 caption="Sensitivity to assumptions: the offset constraints at ⅓×, 1× and 3× their "
                         "configured width decide the verdicts; the unconstrained row shows what the "
                         "data alone say; the Bayes factor B₀₁ grows with the width W of the uniform "
                         "prior on k (see docs/method.md#verdicts).")


def information_table(summary):
    """Shares of the information on k per sample (and per source and host type when given)."""
    info = dig(summary, "information")
    if not isinstance(info, dict):
        return None
    body = []
    for kind, word in (("per_sample", "sample"), ("per_source", "source"), ("per_host_type", "host type")):
        groups = dig(info, kind)
        for name, row in (groups.items() if isinstance(groups, dict) else ()):
            body.append([f"{word} {name}", fmt(dig(row, "n")), _share(dig(row, "loss_if_removed")),
                         _share(dig(row, "alone")), _share(dig(row, "fkk_share"))])
    if not body:
        return None
    return table(["group", "N", "lost if left out", "carried alone", "share of F_kk"], body,
                 caption="What carries the constraint on k: Fisher information on k after profiling "
                         "the nuisance parameters, at the MAP, with the offset constraints as configured.")


def _share(value):
    number = as_float(value)
    return "–" if number is None else f"{100 * number:.0f} %"
