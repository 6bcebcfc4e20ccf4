"""The web report's part for a forecast (forecast.json, docs/method.md#forecast): the predicted
width of k and the power, each sample's share, the mocks' check, and the k-offset degeneracy with
the sample that breaks it. Every key is optional. `forecast_context` gives the data of the
template sections/forecast.html.j2."""

from .formatting import Cell, as_float, dig, fmt, table


def _pct(value):
    number = as_float(value)
    return "–" if number is None else f"{100 * number:.0f} %"


def _sigma(value):
    number = as_float(value)
    return "unbounded" if number is None else f"{number:.3f}"


def forecast_glance(document):
    """One line for the page's headline list."""
    return (f"σ(k) = {_sigma(dig(document, 'sigma_k'))} at k = {fmt(dig(document, 'k_true'), 2)}; power to "
            f"exclude k = 0: {_pct(dig(document, 'power_exclude_k0'))}, k = 3: "
            f"{_pct(dig(document, 'power_exclude_k3'))} at {fmt(dig(document, 'threshold_sigma'), 1)}σ")


def forecast_warnings(document):
    warnings = dig(document, "warnings", default=[])
    return [str(w) for w in warnings] if isinstance(warnings, list) else []


def _facts(document):
    check = dig(document, "check", default={})
    facts = [("predicted σ(k)", _sigma(dig(document, "sigma_k"))),
             ("true k of the plan", fmt(dig(document, "k_true"), 2)),
             (f"power to exclude k = 0 at {fmt(dig(document, 'threshold_sigma'), 1)}σ",
              _pct(dig(document, "power_exclude_k0"))),
             (f"power to exclude k = 3 at {fmt(dig(document, 'threshold_sigma'), 1)}σ",
              _pct(dig(document, "power_exclude_k3")))]
    if dig(check, "std") is not None:
        facts += [(f"spread of k over {fmt(dig(check, 'n'))} mocks (fast fits)",
                   f"{fmt(dig(check, 'std'), 3)} ± {fmt(dig(check, 'std_error'), 3)}"),
                  ("mean k of the mocks", fmt(dig(check, "mean"), 3))]
    return facts


def _samples_table(document):
    rows = []
    for name, row in (dig(document, "samples", default={}) or {}).items():
        z = dig(row, "z_range", default=[None, None])
        rows.append([name, fmt(dig(row, "n")), Cell(fmt(dig(row, "method")), "text"),
                     f"{fmt(z[0], 3)}–{fmt(z[1], 3)}", _pct(dig(row, "information_share")),
                     _sigma(dig(row, "sigma_k_without"))])
    return table(["sample", "n", "method", "z", "share of the information on k", "σ(k) without it"], rows,
                 numeric=[1, 3, 4, 5],
                 caption="Each planned sample's share of the information on k (1 − F_kk without it / F_kk, "
                         "after the nuisances are marginalised).")


def _breaker_table(document):
    degeneracy = dig(document, "degeneracy", default={})
    rows = [[fmt(dig(row, "n")), _sigma(dig(row, "sigma_k_narrow")), _sigma(dig(row, "sigma_k")),
             _sigma(dig(row, "sigma_k_wide")), _sigma(dig(row, "sigma_k_free"))]
            for row in dig(document, "scans", "breaker", default=[])]
    caption = (f"Breaking the degeneracy between k and the offset of {fmt(dig(degeneracy, 'method'))} "
               f"masses: σ(k) against the number of local objects measured with them "
               f"('{fmt(dig(degeneracy, 'anchor'))}'). With none, σ(k) follows the width of the offset "
               "prior; with enough, it no longer depends on it.")
    needed = dig(degeneracy, "breaker_needed")
    if isinstance(needed, dict):
        caption += (f" From {fmt(dig(needed, 'n'))} objects on, σ(k) without offset prior is within "
                    f"{_pct(dig(needed, 'tolerance'))} of σ(k) with priors ×⅓.")
    return table(["local objects", "σ(k), priors ×⅓", "σ(k), priors as planned", "σ(k), priors ×3",
                  "σ(k), no offset prior"], rows, caption=caption)


def _scan_table(rows, key, label, caption):
    body = [[fmt(dig(row, key), 2) if dig(row, key) is not None else "none", _sigma(dig(row, "sigma_k")),
             _pct(dig(row, "power_exclude_k0")), _pct(dig(row, "power_exclude_k3"))] for row in rows]
    return table([label, "σ(k)", "power vs k = 0", "power vs k = 3"], body, caption=caption)


def forecast_context(document, folder=None):
    """Data of the template sections/forecast.html.j2: facts, the samples' shares, the size, prior
    and breaker scans, and the assumptions."""
    scans = dig(document, "scans", default={})
    caveats = dig(document, "caveats", default=[])
    return {"facts": _facts(document),
            "tables": [_samples_table(document),
                       _scan_table(dig(scans, "n_all", default=[]), "n_total", "objects",
                                   "σ(k) and power when every sample grows by the same factor."),
                       _scan_table(dig(scans, "offset_width", default=[]), "width", "offset prior width (dex)",
                                   "σ(k) against the width of every mass-method offset prior.")],
            "breaker": _breaker_table(document),
            "assumptions": [str(item) for item in caveats] if isinstance(caveats, list) else []}
