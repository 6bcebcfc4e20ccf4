"""summary.md of a forecast (docs/method.md#forecast), also printed by the forecast command."""

import math


def _num(value, digits=3):
    if value is None or not math.isfinite(value):
        return "∞ (not measurable)"
    return f"{value:.{digits}f}"


def _pct(value):
    return "n/a" if value is None else f"{100 * value:.0f} %"


def headline(result):
    """One line: σ_k, the powers and the mocks' spread."""
    check = result["check"]
    text = (f"σ(k) = {_num(result['sigma_k'])} at k = {result['k_true']:g}; power to exclude k = 0: "
            f"{_pct(result['power_exclude_k0'])}, k = 3: {_pct(result['power_exclude_k3'])} "
            f"(at {result['threshold_sigma']:g}σ)")
    if check.get("std") is not None:
        text += (f"; {check['n']} mocks: std of k {check['std']:.3f} ± {check['std_error']:.3f}, "
                 f"mean {check['mean']:.3f}")
    return text


def _table(rows, columns):
    """Markdown table of scan rows; columns: (key, header, formatter)."""
    lines = ["| " + " | ".join(h for _, h, _ in columns) + " |", "|" + "---|" * len(columns)]
    for row in rows:
        lines.append("| " + " | ".join(fmt(row.get(key)) for key, _, fmt in columns) + " |")
    return lines


def _width(value):
    return "none" if value is None or value == float("inf") else f"{value:g}"


def forecast_markdown(result, title="cosmogrow forecast"):
    """Markdown text of a forecast result (forecast.json content)."""
    degeneracy = result["degeneracy"]
    lines = [f"# {title}", "", f"**{headline(result)}**", "",
             "| sample | n | method | z range | share of the information on k | σ(k) without it |",
             "|---|---|---|---|---|---|"]
    for name, row in result["samples"].items():
        lo, hi = row["z_range"]
        lines.append(f"| {name} | {row['n']} | {row['method']} | {lo:g}–{hi:g} | "
                     f"{_pct(row['information_share'])} | {_num(row['sigma_k_without'])} |")
    power = (("sigma_k", "σ(k)", _num), ("power_exclude_k0", "power vs k = 0", _pct),
             ("power_exclude_k3", "power vs k = 3", _pct))
    lines += ["", "## σ(k) against the number of objects (all samples scaled)", ""]
    lines += _table(result["scans"]["n_all"], (("n_total", "objects", str),) + power)
    lines += ["", "## σ(k) against the width of the offset priors (dex)", ""]
    lines += _table(result["scans"]["offset_width"], (("width", "width", _width),) + power)
    lines += ["", f"## Degeneracy breaker: local '{degeneracy['anchor']}' objects measured with "
                  f"{degeneracy['method']} masses", ""]
    lines += _table(result["scans"]["breaker"],
                    (("n", "objects", str), ("sigma_k_narrow", "σ(k), priors ×⅓", _num),
                     ("sigma_k", "σ(k)", _num), ("sigma_k_wide", "σ(k), priors ×3", _num),
                     ("sigma_k_free", "σ(k), no prior", _num)))
    needed = degeneracy.get("breaker_needed")
    if needed:
        lines += ["", f"With {needed['n']} objects in '{degeneracy['anchor']}' σ(k) = {needed['sigma_k']:.3f} "
                      f"no longer rests on the offset priors (without them it is within "
                      f"{100 * needed['tolerance']:.0f} % of its value with priors ×⅓)."]
    depth = result["scans"].get(f"z_max[{degeneracy['distant']}]")
    if depth:
        lines += ["", f"## σ(k) against the upper redshift of '{degeneracy['distant']}'", ""]
        lines += _table(depth, (("z_max", "z max", lambda v: f"{v:.2f}"),) + power)
    if result.get("warnings"):
        lines += ["", "## Warnings", ""] + [f"- {text}" for text in result["warnings"]]
    lines += ["", "## Assumptions", ""] + [f"- {text}" for text in result["caveats"]] + [""]
    return "\n".join(lines)
