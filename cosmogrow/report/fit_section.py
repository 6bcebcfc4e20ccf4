"""The web report's parts for a fit: the headline card of k, its warnings and its tables.

Reads a fit's summary.json (see `cosmogrow.inference.fit.summarise`) defensively: every block is
optional. `fit_context` gives the data of the template sections/fit.html.j2.
"""

import re

from markupsafe import Markup, escape

from .formatting import Cell, as_float, dig, fmt, fmt_interval, fmt_p, table
from .verdict_section import assumptions_table, information_table, sigma_text, verdict_items, verdict_line

_GREEK = {"alpha": "α", "beta": "β", "gamma": "γ", "delta": "δ", "sigma": "σ", "tau": "τ"}
_NAME = re.compile(r"^(?P<base>[A-Za-z]+)(?:_(?P<sub>[A-Za-z0-9]+))?(?:\[(?P<tag>.*)\])?$")


def parameter_label(name):
    """HTML label of a model parameter: Greek letters, subscripts, the bracket tag escaped.

    ``sigma_int[local]`` becomes σ<sub>int</sub>[local]; unknown forms are shown escaped as given.
    """
    match = _NAME.match(str(name))
    if not match:
        return escape(name)
    base = _GREEK.get(match["base"], match["base"])
    label = Markup("<var>%s</var>") % base if len(base) == 1 else escape(base)
    if match["sub"]:
        label += Markup("<sub>%s</sub>") % match["sub"]
    if match["tag"] is not None:
        label += Markup("[%s]") % match["tag"]
    return label


def k_parts(k):
    """{'median', 'plus', 'minus'} texts of a k block (median and 68 % interval; plus/minus None
    when the interval is unknown), for the `k_value` macro."""
    median = as_float(dig(k, "median"))
    lo, hi = (as_float(dig(k, "interval68", i)) for i in (0, 1))
    if median is None or lo is None or hi is None:
        return {"median": fmt(median, 2), "plus": None, "minus": None}
    return {"median": fmt(median, 2), "plus": fmt(hi - median, 2, signed=True),
            "minus": fmt(lo - median, 2, signed=True)}


def is_selection_aware(summary):
    return dig(summary, "selection", "corrected")


def selection_declared(summary):
    """True when any sample of the fit declares a selection."""
    samples = dig(summary, "selection", "samples")
    return isinstance(samples, dict) and any(bool(models) for models in samples.values())


def fit_kind_label(summary):
    aware = is_selection_aware(summary)
    if aware is True:
        return "selection-aware fit"
    if aware is False:
        return "plain fit (declared selection ignored)" if selection_declared(summary) else "plain fit"
    return "fit"


def pill(text, tone, href=None):
    """A small status label for the `pills` macro; tone is one of good, bad, warn, info, muted."""
    return {"text": text, "tone": tone, "href": href}


def status_pills(summary):
    """Convergence and selection status as labels (list of `pill` dicts)."""
    pills = []
    converged = dig(summary, "convergence", "converged")
    if converged is True:
        pills.append(pill("converged", "good"))
    elif converged is False:
        pills.append(pill("NOT converged", "bad"))
    aware = is_selection_aware(summary)
    if aware is True:
        pills.append(pill("selection modelled", "info"))
    elif aware is False and selection_declared(summary):
        pills.append(pill("declared selection NOT modelled", "bad"))
    elif aware is False:
        pills.append(pill("no selection declared", "warn"))
    form = dig(summary, "config", "model", "form")
    if form:
        pills.append(pill(f"{form} form", "muted"))
    return pills


def fit_card(label, summary, anchor, n_warnings=0):
    """The headline card of one fit (data of the `fit_card` block of the page): k, intervals,
    significance, status and its count of warnings."""
    k = dig(summary, "k", default={})
    tests = dig(summary, "tests", default={})
    facts = [
        ("68 % interval", fmt_interval(dig(k, "interval68"), 2)),
        ("95 % interval", fmt_interval(dig(k, "interval95"), 2)),
        ("P(k ≤ 0 | data)", fmt_p(dig(tests, "p_k_le_0"))),
        ("against k = 0", sigma_text(summary, 0)),
        ("against k = 3", sigma_text(summary, 3)),
        ("Bayes factor B₀₁", _bayes_text(tests)),
    ]
    pills = status_pills(summary)
    if n_warnings:
        pills.append(pill(f"{n_warnings} warning{'s' if n_warnings != 1 else ''}", "bad", "#warnings"))
    return {"label": label, "anchor": anchor, "kind": fit_kind_label(summary), "k": k_parts(k),
            "pills": pills, "facts": facts, "verdict": verdict_line(summary)}


def _bayes_text(tests):
    """B01 with the width of the uniform k prior it is proportional to."""
    width = as_float(dig(tests, "bayes_factor_prior_width"))
    value = fmt(dig(tests, "bayes_factor_k0"), 3)
    return value if width is None else f"{value} (uniform k prior of width W = {fmt(width, 0)}; B₀₁ ∝ W)"


def fit_warnings(summary):
    """Every warning of the fit: its own list, plus non-convergence and unmodelled selection."""
    own = [str(w) for w in dig(summary, "warnings", default=[]) or [] if w]
    text = " ".join(own).lower()
    derived = []
    conv = dig(summary, "convergence", default={})
    if dig(conv, "converged") is False and "converge" not in text:
        derived.append(f"the chain did not converge ({fmt(dig(conv, 'n_steps'))} steps, "
                       f"{fmt(dig(conv, 'chain_over_tau'), 1)} autocorrelation times)")
    if is_selection_aware(summary) is False and "selection" not in text:
        derived.append("selection is not modelled in this fit")
    crosscheck = dig(summary, "crosscheck", default={})
    for key in ("warning", "warnings"):
        value = dig(crosscheck, key)
        if isinstance(value, str) and value:
            derived.append(f"cross-check: {value}")
        elif isinstance(value, list):
            derived.extend(f"cross-check: {item}" for item in value if item)
    return derived + own


def _selection_text(models):
    if not isinstance(models, list) or not models:
        return "none declared"
    parts = []
    for model in models:
        if isinstance(model, dict):
            kind = model.get("kind", "selection")
            options = ", ".join(f"{key} = {value}" for key, value in model.items() if key != "kind")
            parts.append(f"{kind} ({options})" if options else str(kind))
        else:
            parts.append(str(model))
    return "; ".join(parts)


def data_table(summary):
    """Per-sample overview from summary['data'], with each sample's declared selection."""
    data = dig(summary, "data")
    if not isinstance(data, dict) or not data:
        return None
    selections = dig(summary, "selection", "samples", default={})
    rows = []
    for name, row in data.items():
        row = row if isinstance(row, dict) else {}
        methods = row.get("methods")
        rows.append([name, fmt(row.get("n")), fmt(row.get("z_median")), fmt_interval(row.get("z_range")),
                     fmt(row.get("log_mbh_median"), 2), fmt(row.get("log_mstar_median"), 2),
                     Cell(", ".join(map(str, methods)) if isinstance(methods, list) else fmt(methods), "text"),
                     Cell(_selection_text(dig(selections, name)), "text")])
    return table(["sample", "N", "median z", "z range", "median log M_BH", "median log M_*",
                  "mass methods", "selection"], rows, numeric=range(1, 6),
                 caption="The data: objects per sample, redshifts, median masses (log₁₀ M☉), "
                         "mass methods and declared selection.")


def parameter_table(summary):
    params = dig(summary, "parameters")
    if not isinstance(params, dict) or not params:
        return None
    rows = []
    for name, row in params.items():
        rows.append([parameter_label(name), fmt(dig(row, "median")), fmt_interval(dig(row, "interval68")),
                     fmt_interval(dig(row, "interval95")), fmt(dig(summary, "map", "theta", name)),
                     fmt(dig(summary, "map", "laplace_std", name))])
    return table(["parameter", "median", "68 % interval", "95 % interval", "MAP", "Laplace σ"], rows,
                 caption="Posterior of every parameter (central intervals of the MCMC draws).")


def tests_table(summary):
    tests = dig(summary, "tests")
    if not isinstance(tests, dict):
        return None
    method = dig(tests, "bayes_factor_method")
    rows = [["P(k ≤ 0 | data)", fmt_p(tests.get("p_k_le_0")), "posterior fraction of draws with k ≤ 0"]]
    for k_ref in (0, 3):
        rows.append([f"k = {k_ref} against the best fit", sigma_text(summary, k_ref),
                     "σ-equivalent √Λ of the profile-likelihood ratio (Wilks)"])
        if tests.get(f"sigma_vs_k{k_ref}_unconstrained") is not None:
            rows.append([f"k = {k_ref}, the data alone",
                         f"{fmt(tests[f'sigma_vs_k{k_ref}_unconstrained'], 2)} σ "
                         f"({tests.get('significance_method_unconstrained', 'offsets unconstrained')})",
                         "the same ratio with the offsets unconstrained"])
    rows += [["Savage–Dickey B₀₁ (k = 0 : free k)", _bayes_text(tests),
             f"> 1 favours k = 0; log₁₀ B₀₁ = {fmt(tests.get('log10_bayes_factor_k0'), 2)}"
             + (f"; density from {method}" if method else "")]]
    return table(["test", "value", "meaning"], [[a, b, Cell(c, "text")] for a, b, c in rows],
                 numeric=[1], caption="Hypothesis tests on k.")


def convergence_table(summary):
    conv = dig(summary, "convergence")
    if not isinstance(conv, dict):
        return None
    converged = conv.get("converged")
    state = Cell("yes" if converged else ("NO" if converged is False else "–"),
                 "good" if converged else ("bad" if converged is False else None))
    rows = [["converged", state], ["steps", fmt(conv.get("n_steps"))],
            ["walkers", fmt(conv.get("n_walkers"))],
            ["longest autocorrelation time τ (steps)", fmt(conv.get("tau_max"), 1)],
            ["chain length / τ (required)",
             f"{fmt(conv.get('chain_over_tau'), 1)} ({fmt(conv.get('required_chain_over_tau'), 0)})"],
            ["acceptance fraction", fmt(conv.get("acceptance"), 2)],
            ["burn-in, thinning (steps)", f"{fmt(conv.get('burn_in'))}, {fmt(conv.get('thin'))}"],
            ["posterior draws kept", fmt(conv.get("n_samples"))]]
    return table(["chain", "value"], rows, narrow=True,
                 caption="Convergence of the ensemble sampler.")


_TEST_LABELS = {"ks": "Kolmogorov–Smirnov", "anderson_darling": "Anderson–Darling",
                "epps_singleton": "Epps–Singleton"}


def _crosscheck_rows(compared, tests):
    rows = []
    if isinstance(tests, list):
        tests = {dig(row, "name", default=str(i)): row for i, row in enumerate(tests)}
    if not isinstance(tests, dict):
        return rows
    for name, row in tests.items():
        skipped = dig(row, "skipped")
        rng = dig(row, "range")
        rows.append([compared, _TEST_LABELS.get(name, name), fmt(dig(row, "best_k"), 2),
                     fmt_interval(rng, 2) if rng else ("skipped" if skipped else "none"),
                     _p_text(name, dig(row, "p_best")), Cell(skipped or "", "text")])
    return rows


# scipy.stats.anderson_ksamp caps its p-value to this range (interpolation in a table).
AD_P_RANGE = (0.001, 0.25)
AD_NOTE = ("Anderson–Darling p-values are capped to [0.001, 0.25] by scipy's interpolation table: "
           "≥ 0.250 and ≤ 0.001 mark values at the caps.")


def _p_text(test, value):
    """A p-value; an Anderson–Darling value at scipy's caps is shown as a bound."""
    number = as_float(value)
    if test == "anderson_darling" and number is not None:
        if number >= AD_P_RANGE[1]:
            return f"≥ {AD_P_RANGE[1]:.3f}"
        if number <= AD_P_RANGE[0]:
            return f"≤ {AD_P_RANGE[0]:.3f}"
    return fmt_p(value)


def crosscheck_table(summary):
    """The distribution-matching cross-check (best k and range with p ≥ 0.05 per two-sample test)."""
    check = dig(summary, "crosscheck")
    if not isinstance(check, dict):
        return None
    if dig(check, "skipped"):
        return None
    rows = _crosscheck_rows("high-z samples pooled", dig(check, "tests"))
    per_sample = dig(check, "per_sample")
    if isinstance(per_sample, dict) and len(per_sample) > 1:
        for sample, tests in per_sample.items():
            rows += _crosscheck_rows(f"{sample} alone", tests)
    if not rows:
        return None
    headers = ["compared with the reference", "two-sample test", "best k", "k range with p ≥ 0.05",
               "p at best k", "note"]
    if not any(row[-1].content for row in rows):
        headers, rows = headers[:-1], [row[:-1] for row in rows]
    reference = dig(check, "reference")
    statistic = dig(check, "statistic")
    clipped = any(row[1] == _TEST_LABELS["anderson_darling"] for row in rows)
    return table(headers, rows, numeric=[2, 3, 4],
                 caption=f"Assumption-light cross-check: the high-z statistic "
                         f"({statistic or 'log M_BH/M_*'}) shifted by +k log₁₀(1+z) and compared with "
                         f"the reference sample{f' {reference!s}' if reference else ''} by two-sample "
                         f"tests (no Gaussian scatter assumed; selection and method offsets not modelled)."
                         + (f" {AD_NOTE}" if clipped else ""))


def offset_width_table(summary):
    rows = dig(summary, "degeneracy", "offset_prior_sensitivity")
    if not isinstance(rows, list) or not rows:
        return None
    body = [[fmt(dig(r, "offset_prior_width"), 2), fmt(dig(r, "k_std"))] for r in rows]
    return table(["offset prior width (dex)", "σ(k) (Laplace)"], body, numeric=[1], narrow=True,
                 caption="How the width of k follows the prior width of the mass-method offsets: a "
                         "width that grows with the prior means the data cannot separate k from the offsets.")


def zero_point_text(summary):
    """The mass method the offsets are measured from, and whether it was configured or chosen."""
    configured = dig(summary, "config", "model", "zero_point_method")
    if isinstance(configured, str) and configured:
        return f"{configured} (set in the configuration)"
    data = dig(summary, "data", default={})
    methods = set()
    for row in data.values() if isinstance(data, dict) else []:
        listed = dig(row, "methods")
        methods.update(map(str, listed) if isinstance(listed, list) else ())
    params = dig(summary, "parameters", default={})
    offsets = {name[6:-1] for name in (params if isinstance(params, dict) else {}) if name.startswith("delta[")}
    left = sorted(methods - offsets)
    if len(left) == 1:
        return f"{left[0]} (chosen by cosmogrow; the other methods' offsets δ are fitted against it)"
    return "–"


HOST_ERROR_WORDS = {
    "calibrated": "regression calibration with each sample's parent host distribution (docs/method.md#host-errors)",
    "first_order": "first order: the host error added in quadrature (biases k when host ranges differ)",
}


def model_facts(summary):
    """(term, text) facts of the fit: how k is quoted, the likelihood, the model's choices."""
    model = dig(summary, "config", "model", default={})
    pairs = [("k quoted as", "posterior median and central 68 % / 95 % intervals of the MCMC draws "
                             "(emcee); MAP and Laplace σ in the parameter table"),
             ("likelihood", fit_kind_label(summary)),
             ("zero-point mass method", zero_point_text(summary)),
             ("relation form", fmt(dig(model, "form"))), ("intrinsic scatter", fmt(dig(model, "scatter"))),
             ("host-mass errors", HOST_ERROR_WORDS.get(dig(model, "host_errors"), "–")),
             ("reference redshift z_ref", fmt(dig(model, "z_ref"), 2)),
             ("host-mass pivot (log₁₀ M☉)", fmt(dig(model, "log_mstar_pivot"), 2))]
    return [(term, text) for term, text in pairs if text != "–"]


def fit_context(summary, folder=None):
    """Data of the template sections/fit.html.j2: the fit's facts and tables in reading order
    (figures are added by the page; `folder` is unused)."""
    return {"verdicts": verdict_items(summary), "assumptions": assumptions_table(summary),
            "information": information_table(summary),
            "facts": model_facts(summary), "tables": [data_table(summary), parameter_table(summary), tests_table(summary)],
            "crosscheck_skipped": dig(summary, "crosscheck", "skipped"),
            "crosscheck": crosscheck_table(summary),
            "pair": [convergence_table(summary), offset_width_table(summary)]}
