"""summary.tex: the posterior summary of a fit as a LaTeX table ready to paste into a paper.

The table is a plain ``tabular`` with ``\\hline`` rules, so it needs no package beyond LaTeX itself
(swap ``\\hline`` for booktabs' ``\\toprule``/``\\midrule``/``\\bottomrule`` if the paper uses it).
Numbers are printed with a fixed number of decimals, rounded from summary.json. Every text that comes
from the data (sample and method names inside parameter names) is escaped for LaTeX.
"""

import math
import re

_LATEX_SPECIALS = {"\\": r"\textbackslash{}", "&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#",
                   "_": r"\_", "{": r"\{", "}": r"\}", "~": r"\textasciitilde{}",
                   "^": r"\textasciicircum{}", "<": r"\textless{}", ">": r"\textgreater{}"}
_SPECIAL_RE = re.compile("|".join(re.escape(c) for c in _LATEX_SPECIALS))
_SYMBOLS = {"k": "k", "alpha": r"\alpha", "beta": r"\beta", "gamma": r"\gamma", "sigma_int": r"\sigma_{\rm int}",
            "delta": r"\delta", "f_out": r"f_{\rm out}", "sigma_out": r"\sigma_{\rm out}"}
_NAME = re.compile(r"^(?P<base>[A-Za-z_]+?)(?:\[(?P<tag>.*)\])?$")


def escape_latex(text):
    """Text with LaTeX's special characters escaped (safe in text mode)."""
    return _SPECIAL_RE.sub(lambda m: _LATEX_SPECIALS[m.group()], str(text))


def _latex_sigma(text):
    """Escaped text with each σ set as math."""
    return escape_latex(text).replace("σ", r"$\sigma$")


def parameter_symbol(name):
    """LaTeX of a parameter name: ``sigma_int[local]`` → ``$\\sigma_{\\rm int}$[local]``.

    Unknown names are set in text with their special characters escaped.
    """
    match = _NAME.match(str(name))
    if match and match["base"] in _SYMBOLS:
        symbol = f"${_SYMBOLS[match['base']]}$"
        return symbol + (f"[{escape_latex(match['tag'])}]" if match["tag"] is not None else "")
    return escape_latex(name)


def format_number(value, digits=3, *, scientific=False):
    """A number in math mode with `digits` decimals; an en dash when absent or not finite.

    With `scientific`, values below 10^-digits or from 10^4 up are written m\times10^{e} with
    `digits` significant figures.
    """
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        return "--"
    if scientific and value != 0 and (abs(value) < 10.0**-digits or abs(value) >= 1e4):
        mantissa, exponent = f"{value:.{digits - 1}e}".split("e")
        return rf"${mantissa}\times10^{{{int(exponent)}}}$"
    text = f"{value:.{digits}f}"
    if text.startswith("-") and float(text) == 0.0:
        text = text[1:]  # no "-0.000"
    return f"${text}$"


def _interval(pair, digits):
    """``$[lo, hi]$``, or an en dash when either end is missing."""
    if not isinstance(pair, (list, tuple)) or len(pair) != 2:
        return "--"
    ends = [format_number(v, digits) for v in pair]
    if "--" in ends:
        return "--"
    return f"$[{ends[0].strip('$')}, {ends[1].strip('$')}]$"


def _get(mapping, *keys):
    for key in keys:
        if not isinstance(mapping, dict) or key not in mapping:
            return None
        mapping = mapping[key]
    return mapping


def posterior_table(summary, *, digits=3, label="tab:cosmogrow-posterior", caption=None):
    """A LaTeX ``table`` of a fit summary (the content of summary.json).

    Parameters
    ----------
    summary : dict, a fit's summary (keys "parameters", "tests", "convergence" are used if present)
    digits : int, decimals of every number
    label : str, the \\label of the table
    caption : str, optional; default states the intervals, the tests and convergence (escaped)

    Returns
    -------
    str: one ``table`` environment holding a ``tabular`` with rows "parameter & median & 68 % & 95 %",
    then the hypothesis tests on k.
    """
    params = _get(summary, "parameters") or {}
    tests = _get(summary, "tests") or {}
    conv = _get(summary, "convergence") or {}
    if caption is None:
        state = {True: "converged", False: "NOT converged"}.get(_get(conv, "converged"), "convergence unknown")
        aware = _get(summary, "selection", "corrected")
        selection = {True: "selection modelled", False: "selection not modelled"}.get(aware, "")
        caption = ("Posterior medians and central 68 and 95 per cent intervals of the model parameters "
                   f"(cosmogrow; {state}" + (f", {selection}" if selection else "") + ").")
    lines = [r"% Written by cosmogrow from summary.json. Plain tabular: no package needed",
             r"% (with booktabs, replace the \hline rules by \toprule, \midrule and \bottomrule).",
             r"\begin{table}", r"\centering", rf"\caption{{{escape_latex(caption)}}}",
             rf"\label{{{escape_latex(label)}}}", r"\begin{tabular}{lccc}", r"\hline",
             r"Parameter & Median & 68\% interval & 95\% interval \\", r"\hline"]
    for name, row in params.items():
        row = row if isinstance(row, dict) else {}
        lines.append(f"{parameter_symbol(name)} & {format_number(row.get('median'), digits)} & "
                     f"{_interval(row.get('interval68'), digits)} & "
                     f"{_interval(row.get('interval95'), digits)} \\\\")
    width = tests.get("bayes_factor_prior_width")
    test_rows = [(r"$P(k \le 0 \mid \mathrm{data})$", tests.get("p_k_le_0")),
                 (r"Profile likelihood, $k = 0$ ($\sigma$)", tests.get("sigma_vs_k0")),
                 (r"Profile likelihood, $k = 3$ ($\sigma$)", tests.get("sigma_vs_k3")),
                 (r"Profile likelihood, $k = 0$, data alone ($\sigma$)", tests.get("sigma_vs_k0_unconstrained")),
                 (r"Profile likelihood, $k = 3$, data alone ($\sigma$)", tests.get("sigma_vs_k3_unconstrained")),
                 (r"Savage--Dickey $B_{01}$ at $k = 0$"
                  + (f" ($k$ prior width $W = {width:g}$)" if isinstance(width, (int, float)) else ""),
                  tests.get("bayes_factor_k0"))]
    test_rows = [(text, value) for text, value in test_rows if value is not None]
    if test_rows:
        lines += [r"\hline", r"\multicolumn{4}{l}{Tests on $k$} \\"]
        lines += [rf"{text} & {format_number(value, digits, scientific=True)} & & \\"
                  for text, value in test_rows]
        notes = [f"σ: {tests['significance_method']}" if tests.get("significance_method") else None,
                 f"Verdicts: {summary['headline']}" if summary.get("headline") else None]
        lines += [rf"\multicolumn{{4}}{{l}}{{\footnotesize {_latex_sigma(note)}}} \\"
                  for note in notes if note]
    lines += [r"\hline", r"\end{tabular}", r"\end{table}", ""]
    return "\n".join(lines)
