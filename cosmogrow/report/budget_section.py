"""The web report's parts for the consequences of a k: the dark-energy budget (budget.json) and the
stellar-remnant test (remnants.json). Every key is optional. `budget_context` and
`remnants_context` give the data of the templates sections/budget.html.j2 and remnants.html.j2."""

from .formatting import Cell, as_float, dig, fmt, fmt_p, fmt_sig, table

MAX_OBJECT_ROWS = 60


def _summary_interval(block):
    """'median [p16, p84]' of a summarise_samples block, or None."""
    if not isinstance(block, dict):
        return None
    return (f"{fmt_sig(block.get('median'))}  (68 %: [{fmt_sig(block.get('p16'))}, "
            f"{fmt_sig(block.get('p84'))}])")


def budget_table(document):
    rows = []
    spec = [("coupling exponent k", "k", "k_summary", ""),
            ("Ω_BH today", "omega_bh", "omega_bh_summary", ""),
            ("Ω_Λ of the cosmology", "omega_lambda", None, ""),
            ("fraction of Ω_Λ", "fraction_of_lambda", "fraction_of_lambda_summary", ""),
            ("ρ_BH today (comoving)", "rho_bh_comoving_today", "rho_bh_comoving_today_summary", "M☉ Mpc⁻³"),
            ("critical density ρ_crit,0", "rho_crit0", None, "M☉ Mpc⁻³"),
            ("ε_BH (black-hole mass per stellar mass formed)", "eps_bh", None, "")]
    for label, key, summary_key, unit in spec:
        value = dig(document, key)
        if value is None:
            continue
        spread = _summary_interval(dig(document, summary_key)) if summary_key else None
        rows.append([label, fmt_sig(value, 4), Cell(spread or "–", "text"), unit])
    if not rows:
        return None
    point = dig(document, "point_values_are")
    headers = ["quantity", "value", "over the posterior of k", "unit"]
    if all(row[2].content == "–" for row in rows):  # a single k: no spread to show
        headers, rows = headers[:2] + headers[3:], [row[:2] + row[3:] for row in rows]
    return table(headers, rows, numeric=[1], caption="Comoving density today of coupled stellar-remnant black holes "
                                      "against dark energy" + (f" (values are {point})." if point else "."))


def _eps_facts(document):
    eps = dig(document, "eps_bh_details")
    if not isinstance(eps, dict):
        return []
    if eps.get("given_directly"):
        return [("ε_BH", "given directly")]
    return [("IMF", fmt(dig(eps, "imf", "name"))), ("IMF reference", fmt(dig(eps, "imf", "reference"))),
            ("least progenitor mass", f"{fmt(eps.get('min_progenitor_msun'), 1)} M☉"),
            ("remnant mass fraction", f"{fmt(eps.get('remnant_fraction'), 2)} ({fmt(eps.get('remnant_fraction_source'))})")]


def _assumptions(document):
    items = dig(document, "assumptions")
    return [str(item) for item in items] if isinstance(items, list) else []


def budget_context(document, folder=None):
    """Data of the template sections/budget.html.j2: the budget table, its inputs and assumptions."""
    inputs = dig(document, "inputs", default={})
    facts = [("star formation", fmt(dig(inputs, "star_formation", "reference",
                                        default=dig(inputs, "star_formation", "kind")))),
             ("formation from z_max", fmt(dig(inputs, "z_max"), 1)),
             ("formation floor z", fmt(dig(inputs, "z_floor"), 1)),
             ("posterior of k from", fmt(dig(inputs, "posterior")))] + _eps_facts(document)
    facts = [(a, b) for a, b in facts if b not in ("–", "– M☉")]
    return {"table": budget_table(document), "facts": facts, "assumptions": _assumptions(document)}


def budget_warnings(document):
    return [str(w) for w in dig(document, "warnings", default=[]) or [] if w and isinstance(w, str)]


def budget_glance(document):
    fraction = as_float(dig(document, "fraction_of_lambda"))
    which = "the posterior median " if dig(document, "point_values_are") == "posterior medians" else ""
    text = f"Ω_BH = {fmt_sig(dig(document, 'omega_bh'))} at {which}k = {fmt(dig(document, 'k'), 2)}"
    return text + (f", {fmt_sig(100 * fraction)} % of Ω_Λ" if fraction is not None else "")


def remnants_table(document):
    objects = dig(document, "objects")
    if not isinstance(objects, list) or not objects:
        return None
    rows = []
    for entry in objects[:MAX_OBJECT_ROWS]:
        p_above = as_float(dig(entry, "p_above_limit"))
        rows.append([fmt(dig(entry, "id")), f"{fmt(dig(entry, 'mass'), 2)} ± {fmt(dig(entry, 'mass_err'), 2)}",
                     fmt(dig(entry, "z_obs"), 3), fmt(dig(entry, "z_form"), 2),
                     f"{fmt(dig(entry, 'birth_mass'), 2)} ± {fmt(dig(entry, 'birth_mass_err'), 2)}",
                     Cell(fmt_p(p_above), "bad" if p_above is not None and p_above < 0.05 else None),
                     fmt(dig(entry, "k_max_95"), 2)])
    more = len(objects) - MAX_OBJECT_ROWS
    return table(["id", "mass today (M☉)", "z observed", "z formed", "birth mass (M☉)",
                  "P(birth > limit)", "largest k at 95 %"], rows,
                 caption="Birth mass of each black hole under the evaluated k and the probability that it "
                         "exceeds the neutron-star limit" + (f" (first {MAX_OBJECT_ROWS} of "
                                                             f"{len(objects)} shown)." if more > 0 else "."))


def remnants_context(document, folder=None):
    """Data of the template sections/remnants.html.j2: facts, the per-object table, assumptions."""
    facts = [("k evaluated", f"{fmt(dig(document, 'k'), 2)} ({fmt(dig(document, 'k_is'))})"),
             ("limit", f"{fmt(dig(document, 'limit_msun'), 2)} M☉"),
             ("limit from", fmt(dig(document, "limit_reference"))),
             ("joint probability all born above the limit", fmt_p(dig(document, "joint_probability"))),
             ("largest k with joint probability ≥ 0.95", fmt(dig(document, "k_max_95"), 2))]
    averaged = dig(document, "posterior", "joint_probability_mean")
    if averaged is not None:
        facts.append(("joint probability averaged over the posterior of k", fmt_p(averaged)))
    return {"facts": facts, "table": remnants_table(document), "assumptions": _assumptions(document)}


def remnants_warnings(document):
    out = [str(w) for w in dig(document, "warnings", default=[]) or [] if w and isinstance(w, str)]
    joint = as_float(dig(document, "joint_probability"))
    if joint is not None and joint < 0.05:
        out.append(f"stellar remnants: at k = {fmt(dig(document, 'k'), 2)} the probability that every "
                   f"black hole was born above {fmt(dig(document, 'limit_msun'), 2)} M☉ is only {fmt_p(joint)}")
    return out


def remnants_glance(document):
    return (f"largest k keeping every birth mass above {fmt(dig(document, 'limit_msun'), 2)} M☉ "
            f"at 95 %: {fmt(dig(document, 'k_max_95'), 2)}")
