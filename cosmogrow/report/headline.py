"""The data of the page's headline: which fit is the answer, a card per fit, the fits side by side,
the true k of simulated data when it is known, and one line per other kind of results.

The answer is the fit that models how its samples were selected (see docs/method.md#selection):
a fit that ignores a declared selection on black-hole mass is biased, so it is shown for
comparison only. The order of the cards follows this rule, never the order of the command line.
"""

from . import fit_section
from .formatting import Cell, dig, fmt, fmt_interval, fmt_p, safely, table
from .sections import BY_KIND
from .verdict_section import short_sigma

RANK_WORDS = {0: "it models the declared selection of its samples",
              1: "no selection is declared for its samples, so there is none to model"}


def answer_rank(summary):
    """0: selection modelled; 1: plain fit of samples without a declared selection; 2: a fit that
    ignores its declared selection (or does not say)."""
    aware = fit_section.is_selection_aware(summary)
    if aware is True:
        return 0
    if aware is False and not fit_section.selection_declared(summary):
        return 1
    return 2


def order_key(entry):
    """Sort key of a fit entry: the answer first (by `answer_rank`), then by label, never by the
    order of the command line."""
    return answer_rank(entry["document"]), entry["label"], entry["anchor"]


def order_fits(fits):
    """Fit entries, the answer first (see `order_key`)."""
    return sorted(fits, key=order_key)


def answer_text(fits):
    """One sentence naming the fit whose k is the answer, or saying that none is."""
    if not fits:
        return None
    best = fits[0]
    rank = answer_rank(best["document"])
    if rank == 2:
        return ("No fit on this page models its declared selection: none of these values of k is the "
                "answer (a fit that ignores a selection on black-hole mass is biased).")
    k = dig(best["document"], "k", default={})
    others = " The other fits are shown for comparison only." if len(fits) > 1 else ""
    return (f"The answer is the {fit_section.fit_kind_label(best['document'])} ‘{best['label']}’, "
            f"k = {fmt(dig(k, 'median'), 2)} (posterior median; 68 % interval "
            f"{fmt_interval(dig(k, 'interval68'), 2)}): {RANK_WORDS[rank]}.{others}")


def _card(entry, is_answer, truth):
    card = fit_section.fit_card(entry["label"], entry["document"], entry["anchor"], len(entry["warnings"]))
    card["role"] = "the answer" if is_answer else "for comparison"
    if truth is not None:
        card["facts"].append(("true k (simulation)", fmt(truth["k"], 2)))
    return card


def comparison_table(fits, truth=None):
    """The fits side by side (answer first), with the true k when known."""
    rows = []
    for i, entry in enumerate(fits):
        doc = entry["document"]
        k = dig(doc, "k", default={})
        conv = dig(doc, "convergence", "converged")
        role = "the answer" if i == 0 and answer_rank(doc) < 2 else "for comparison"
        rows.append([entry["label"], Cell(role, "text"), Cell(fit_section.fit_kind_label(doc), "text"),
                     fmt(dig(k, "median"), 2), fmt_interval(dig(k, "interval68"), 2),
                     fmt_interval(dig(k, "interval95"), 2), fmt_p(dig(doc, "tests", "p_k_le_0")),
                     short_sigma(doc, 0),
                     Cell(fmt(conv), "good" if conv else ("bad" if conv is False else None))])
    caption = "k from every fit on this page, side by side (posterior medians and central intervals)"
    caption += f"; the true k of these simulated data is {fmt(truth['k'], 2)}." if truth else "."
    return table(["fit", "role", "likelihood", "median k", "68 % interval", "95 % interval", "P(k ≤ 0)",
                  "σ against k = 0", "converged"], rows, numeric=range(3, 9), caption=caption)


def _glance(entries):
    lines = []
    for entry in entries:
        function = BY_KIND[entry["kind"]].glance
        if function is None:
            continue
        text, _ = safely(function, entry["document"], fallback="see its section")
        lines.append({"href": f"#{entry['anchor']}", "what": f"{entry['name']} · {entry['label']}",
                      "text": text, "colour": entry["colour"]})
    return lines


def headline_context(entries, truth=None):
    """Data of the headline block of page.html.j2.

    Parameters
    ----------
    entries : list of dict, the page's results sections
    truth : dict or None, the simulation truth (with a finite "k") of simulated data
    """
    fits = order_fits([e for e in entries if e["kind"] == "fit"])
    answer = bool(fits) and answer_rank(fits[0]["document"]) < 2
    cards = [_card(entry, answer and i == 0, truth) for i, entry in enumerate(fits)]
    return {"cards": cards, "answer": answer_text(fits),
            "comparison": comparison_table(fits, truth) if len(fits) > 1 else None,
            "truth": None if truth is None else {"k": fmt(truth["k"], 2), "source": truth["source"]},
            "glance": _glance(entries)}
