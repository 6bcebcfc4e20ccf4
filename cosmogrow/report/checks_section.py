"""The web report's parts for null tests (nulltests.json) and the survival of a claimed k
(challenge.json).

Both files are read by meaning, not by a fixed layout: each test is found under "tests" (a list, or
a mapping of name to result), its verdict under "passed"/"pass"/"ok", its p-value under
"p_value"/"p", and so on. Anything absent is simply not shown.
"""

from .htmlkit import (Cell, as_float, definition_list, details, dig, flat_scalars, fmt, fmt_interval,
                      fmt_p, join, table, tag)

_PASS_KEYS = ("passed", "pass", "ok", "passes")
_P_KEYS = ("p_value", "p", "pvalue", "p_value_permutation")
_NULL_KEYS = ("null_hypothesis", "null", "hypothesis")
_NOTE_KEYS = ("interpretation", "message", "explanation", "note", "verdict", "meaning", "reason")


def _first(row, keys):
    for key in keys:
        value = dig(row, key)
        if value is not None:
            return value
    return None


def null_test_rows(document):
    """[(name, result dict)] of a nulltests.json, whatever its top-level layout."""
    tests = dig(document, "tests", default=document if isinstance(document, dict) else None)
    if isinstance(tests, list):
        return [(str(_first(row, ("name", "test", "id")) or f"test {i + 1}"), row)
                for i, row in enumerate(tests) if isinstance(row, dict)]
    if isinstance(tests, dict):
        return [(str(name), row) for name, row in tests.items()
                if isinstance(row, dict) and (_first(row, _PASS_KEYS) is not None
                                              or _first(row, _P_KEYS) is not None)]
    return []


def test_passed(row):
    """True, False or None (not stated) for one test."""
    value = _first(row, _PASS_KEYS)
    if isinstance(value, bool):
        return value
    if isinstance(value, str):
        return {"pass": True, "passed": True, "yes": True, "fail": False, "failed": False,
                "no": False}.get(value.strip().lower())
    status = dig(row, "status")
    if isinstance(status, str):
        return {"pass": True, "passed": True, "fail": False, "failed": False}.get(status.lower())
    return None


def _statistic_text(row):
    statistic = dig(row, "statistic")
    if isinstance(statistic, dict):
        name = _first(statistic, ("name", "kind"))
        value = _first(statistic, ("value", "observed"))
        return f"{name}: {fmt(value)}" if name is not None else fmt(value)
    value = fmt(statistic) if statistic is not None else None
    name = dig(row, "statistic_name")
    return f"{name}: {value}" if name and value else (value or fmt(_first(row, ("k", "k_observed", "value"))))


def _threshold_text(row):
    threshold = dig(row, "threshold")
    if isinstance(threshold, dict):
        return ", ".join(f"{key} {fmt(value)}" for key, value in threshold.items())
    return fmt(threshold)


def nulltests_table(document, number):
    rows = []
    for name, row in null_test_rows(document):
        passed = test_passed(row)
        verdict = Cell("pass" if passed else ("FAIL" if passed is False else "–"),
                       "good" if passed else ("bad" if passed is False else None))
        interval = dig(row, "interval", default=dig(row, "interval95"))
        rows.append([name, verdict, Cell(fmt(_first(row, _NULL_KEYS)), "text"), _statistic_text(row),
                     fmt_p(_first(row, _P_KEYS)), fmt_interval(interval, 2) if interval else "–",
                     _threshold_text(row), Cell(fmt(_first(row, _NOTE_KEYS)), "text")])
    if not rows:
        return tag("p", "nulltests.json holds no recognisable list of tests.", cls="note")
    return table(["test", "result", "null hypothesis", "statistic", "p-value", "interval", "threshold",
                  "what it says"], rows, number=number, numeric=[3, 4, 5, 6],
                 caption="Null tests: each states its null hypothesis, statistic and threshold, "
                         "and passes or fails.")


def nulltests_body(document, numbering, folder=None):
    parts = []
    plain = _first(document, ("summary", "plain_words", "interpretation", "verdict"))
    if isinstance(plain, str) and plain:
        parts.append(tag("p", plain, cls="lede"))
    parts.append(nulltests_table(document, numbering.table))
    text = (folder.texts.get("summary.md") if folder is not None else None)
    if text:
        parts.append(details("summary.md as written by the command", tag("pre", text, cls="text")))
    return join(parts)


def nulltests_warnings(document):
    out = [str(w) for w in dig(document, "warnings", default=[]) or [] if w and isinstance(w, str)]
    for name, row in null_test_rows(document):
        if test_passed(row) is False:
            note = _first(row, _NOTE_KEYS)
            out.append(f"null test '{name}' FAILED" + (f": {note}" if isinstance(note, str) and note else ""))
    return out


def nulltests_glance(document):
    rows = null_test_rows(document)
    verdicts = [test_passed(row) for _, row in rows]
    failed = [name for (name, _), v in zip(rows, verdicts) if v is False]
    text = f"{sum(v is True for v in verdicts)} of {len(rows)} null tests pass"
    return text + (f"; failed: {', '.join(failed)}" if failed else "")


# --- challenge --------------------------------------------------------------------------------

def claimed_k(document):
    return _first(document, ("claim", "claimed_k", "k_claim", "k_claimed"))


def verdict_text(document):
    verdict = _first(document, ("verdict", "conclusion", "summary"))
    if isinstance(verdict, dict):
        verdict = _first(verdict, ("text", "message", "summary"))
    return verdict if isinstance(verdict, str) else None


def _p_value_rows(document):
    """(where, p-value) pairs: every scalar leaf whose path names a p-value."""
    rows = []
    for path, value in flat_scalars(document, limit=400, skip=("versions", "inputs", "config", "draws",
                                                               "samples", "estimates")):
        leaf = path.rsplit(".", 1)[-1].lower()
        if ("p_value" in path.lower() or leaf in ("p", "pvalue")) and as_float(value) is not None:
            rows.append((path, value))
    return rows


def challenge_body(document, numbering, folder=None):
    parts = []
    verdict = verdict_text(document)
    consistent = dig(document, "consistent", default=dig(document, "survives"))
    if verdict:
        tone = "bad" if consistent is False else ("good" if consistent is True else "info")
        parts.append(tag("p", verdict, cls=f"verdict verdict-{tone}"))
    observed = _first(document, ("observed", "observed_k", "k_observed"))
    facts = [("claimed k", fmt(claimed_k(document), 2))]
    if isinstance(observed, dict):
        facts += [(f"observed {key}", fmt(value)) for key, value in flat_scalars(observed, limit=8)]
    elif observed is not None:
        facts.append(("observed k", fmt(observed)))
    facts += [(key.replace("_", " "), fmt(dig(document, key)))
              for key in ("n_mocks", "realisations", "seed") if dig(document, key) is not None]
    parts.append(definition_list(facts))
    rows = [[Cell(path, "text"), Cell(fmt_p(value), "bad" if as_float(value) < 0.05 else None)]
            for path, value in _p_value_rows(document)]
    if rows:
        parts.append(table(["where the observed estimate falls", "p-value"], rows, number=numbering.table,
                           caption="Two-sided p-values of the observed k among mocks of the data's own "
                                   "design simulated under the claimed k and under k = 0, fitted with "
                                   "the plain and the selection-aware likelihood."))
    distributions = dig(document, "distributions", default=dig(document, "mocks"))
    if isinstance(distributions, (dict, list)):
        values = [(Cell(path, "text"), fmt(value)) for path, value in
                  flat_scalars(distributions, limit=60, skip=("draws", "samples", "estimates", "values"))]
        if values:
            parts.append(table(["mock distribution", "value"], values, number=numbering.table,
                               caption="Summaries of the mock distributions of k."))
    return join(parts)


def challenge_warnings(document):
    out = [str(w) for w in dig(document, "warnings", default=[]) or [] if w and isinstance(w, str)]
    consistent = dig(document, "consistent", default=dig(document, "survives"))
    if consistent is False:
        out.append(f"challenge: a claimed k = {fmt(claimed_k(document), 2)} is not consistent with "
                   "these data once their selection is modelled")
    return out


def challenge_glance(document):
    verdict = verdict_text(document)
    return verdict or f"claimed k = {fmt(claimed_k(document), 2)} tested against mocks of the data"
