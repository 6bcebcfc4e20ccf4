"""The web report's parts for null tests (nulltests.json) and the survival of a claimed k
(challenge.json).

Both files are read by meaning, not by a fixed layout: each test is found under "tests" (a list, or
a mapping of name to result), its verdict under "passed"/"pass"/"ok", its p-value under
"p_value"/"p", and so on. Anything absent is simply not shown. `nulltests_context` and
`challenge_context` give the data of the templates sections/nulltests.html.j2 and challenge.html.j2.
"""

import re

from .formatting import Cell, as_float, dig, flat_scalars, fmt, fmt_interval, fmt_p, table

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
    """[(name, result dict)] of a nulltests.json, whatever its top-level layout (skipped tests too)."""
    tests = dig(document, "tests")
    if isinstance(tests, list):
        return [(str(_first(row, ("name", "test", "id")) or f"test {i + 1}"), row)
                for i, row in enumerate(tests) if isinstance(row, dict)]
    if isinstance(tests, dict):
        return [(str(name), row) for name, row in tests.items() if isinstance(row, dict)]
    if tests is None and isinstance(document, dict):  # a bare mapping of name -> result
        return [(str(name), row) for name, row in document.items()
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


def _statistic_value(row):
    """The test statistic's value as text (a dict statistic gives its value)."""
    statistic = dig(row, "statistic")
    if isinstance(statistic, dict):
        return fmt(_first(statistic, ("value", "observed")))
    value = _first(row, ("value", "k", "k_observed"))
    if value is None and isinstance(statistic, (int, float)):
        value = statistic
    return fmt(value, 2)


def _statistic_words(row):
    statistic = dig(row, "statistic")
    if isinstance(statistic, dict):
        statistic = _first(statistic, ("name", "kind", "description"))
    return statistic if isinstance(statistic, str) else None


def _threshold_text(row):
    threshold = dig(row, "threshold")
    if isinstance(threshold, dict):
        return ", ".join(f"{key} {fmt(value)}" for key, value in threshold.items())
    return fmt(threshold)


def nulltests_table(document):
    rows = []
    for name, row in null_test_rows(document):
        passed = test_passed(row)
        verdict = Cell("pass" if passed else ("FAIL" if passed is False else
                                              ("not applicable" if dig(row, "skipped") else "–")),
                       "good" if passed else ("bad" if passed is False else None),
                       title=dig(row, "skipped") if passed is None else None)
        interval = dig(row, "interval", default=dig(row, "interval95"))
        rows.append([dig(row, "title", default=name), verdict, _statistic_value(row),
                     fmt_p(_first(row, _P_KEYS)), fmt_interval(interval, 2) if interval else "–",
                     Cell(_threshold_text(row), "text"), Cell(fmt(_first(row, _NOTE_KEYS)), "text")])
    if not rows:
        return None
    return table(["test", "result", "statistic", "p-value", "95 % range under the null", "threshold",
                  "what it says"], rows, numeric=[2, 3, 4],
                 caption="Null tests: each passes or fails at its stated threshold (one p-value per "
                         "test); \"not applicable\" marks a test that cannot fail for its stated reason "
                         "on these data, with the reason. Null hypotheses and statistics are listed "
                         "below the table.")


def nulltests_definitions(document):
    """[{'title', 'null', 'statistic'}] of the tests that state a null hypothesis or a statistic."""
    items = []
    for name, row in null_test_rows(document):
        null = _first(row, _NULL_KEYS)
        words = _statistic_words(row)
        if null or words:
            items.append({"title": dig(row, "title", default=name), "null": fmt(null) if null else None,
                          "statistic": words})
    return items


# How the null tests and the challenge estimate k ("mode" of their results files).
MODE_WORDS = {"fast": "fast estimate: maximum a posteriori k ± Laplace σ",
              "mcmc": "posterior median ± standard deviation of MCMC draws"}


def estimator_words(document):
    """Which estimator gave the k a results file quotes, in words (from its "mode")."""
    mode = dig(document, "mode")
    return MODE_WORDS.get(mode, f"estimator {mode}" if mode else "estimator not recorded")


def nulltests_facts(document):
    observed = dig(document, "observed")
    pairs = []
    if observed is not None:
        pairs.append((f"k of the data ({estimator_words(document)})", _observed_text(observed)))
    labels = (("alpha", "level of each test"), ("repeats", "repeats per test"),
              ("seed", "seed"), ("selection_modelled", "selection modelled"))
    pairs += [(label, fmt(dig(document, key))) for key, label in labels if dig(document, key) is not None]
    confounding = dig(document, "confounding")
    if isinstance(confounding, dict) and confounding:
        words = {"method": "mass method", "host_type": "host type"}
        pairs.append(("share of the variance of log(1+z) explained by",
                      ", ".join(f"{words.get(name, name)} {fmt(value, 2)}" for name, value in confounding.items())))
    return pairs


def _lines(value):
    """Non-empty strings of a text or a list of texts."""
    value = [value] if isinstance(value, str) else value
    return [line for line in value if isinstance(line, str) and line] if isinstance(value, list) else []


def nulltests_context(document, folder=None):
    """Data of the template sections/nulltests.html.j2."""
    return {"lede": _lines(_first(document, ("summary", "plain_words", "interpretation", "verdict"))),
            "facts": nulltests_facts(document), "table": nulltests_table(document),
            "definitions": nulltests_definitions(document),
            "summary_md": folder.texts.get("summary.md") if folder is not None else None}


def nulltests_warnings(document):
    out = [str(w) for w in dig(document, "warnings", default=[]) or [] if w and isinstance(w, str)]
    for name, row in null_test_rows(document):
        if test_passed(row) is False:
            note = _first(row, _NOTE_KEYS)
            title = dig(row, "title", default=name)
            note = re.sub(r"^(FAILS|FAILED|fails|failed)\s*:\s*", "", note) if isinstance(note, str) else ""
            out.append(f"null test '{title}' FAILED" + (f": {note}" if note else ""))
    return out


def nulltests_glance(document):
    rows = null_test_rows(document)
    verdicts = [test_passed(row) for _, row in rows]
    failed = [str(dig(row, "title", default=name)) for (name, row), v in zip(rows, verdicts) if v is False]
    ran = sum(v is not None for v in verdicts)
    text = f"{sum(v is True for v in verdicts)} of {ran} null tests pass"
    k = dig(document, "observed", "k")
    if k is not None:
        text = f"data k = {fmt(k, 2)} ({estimator_words(document)}); " + text
    if ran < len(rows):
        text += f" ({len(rows) - ran} not applicable)"
    return text + (f"; failed: {', '.join(failed)}" if failed else "")


# --- challenge --------------------------------------------------------------------------------

ESTIMATOR_NAMES = {"selection_aware": "selection-aware", "plain": "plain"}
HYPOTHESIS_NAMES = {"claim": "claimed k", "null": "k = 0 hypothesis"}


def claimed_k(document):
    return _first(document, ("claim", "claimed_k", "k_claim", "k_claimed"))


STATUS_TONES = {"consistent": "good", "not consistent": "bad", "depends on assumptions": "info"}


def _verdicts(document):
    """[(label, status or None, consistent or None, text)] of the challenge's verdicts, the claim
    first."""
    verdict = _first(document, ("verdict", "conclusion"))
    if isinstance(verdict, str):
        return [("claim", None, dig(document, "consistent"), verdict)]
    if isinstance(verdict, dict):
        if isinstance(_first(verdict, ("text", "message")), str):
            return [("claim", dig(verdict, "status"), dig(verdict, "consistent"),
                     _first(verdict, ("text", "message")))]
        return [(label, dig(row, "status"), dig(row, "consistent"), dig(row, "text"))
                for label, row in verdict.items() if isinstance(dig(row, "text"), str)]
    return []


def _tone(status, consistent):
    if status in STATUS_TONES:
        return STATUS_TONES[status]
    return "bad" if consistent is False else ("good" if consistent else "info")


def verdict_text(document):
    """The claim's verdict: its status word first, then its sentence."""
    verdicts = _verdicts(document)
    if not verdicts:
        return None
    _, status, _, text = verdicts[0]
    return f"{status}: {text}" if status else text


def _observed_text(value):
    if isinstance(value, dict):
        estimate, spread = _first(value, ("k", "median")), _first(value, ("k_std", "std"))
        return f"{fmt(estimate)} ± {fmt(spread)}" if spread is not None else fmt(estimate)
    return fmt(value)


def challenge_facts(document):
    observed = dig(document, "observed")
    pairs = [("claimed k", fmt(claimed_k(document), 2))]
    words = estimator_words(document)
    if isinstance(observed, dict) and not {"k", "median"} & set(observed):
        pairs += [(f"k of the data, {ESTIMATOR_NAMES.get(name, name)} fit ({words})", _observed_text(value))
                  for name, value in observed.items()]
    elif observed is not None:
        pairs.append((f"k of the data ({words})", _observed_text(observed)))
    labels = (("replicas", "mocks per hypothesis"), ("threshold", "threshold (σ, the fit's)"),
              ("alpha", "level"), ("selection_declared", "selection declared"), ("seed", "seed"))
    pairs += [(label, fmt(dig(document, key))) for key, label in labels if dig(document, key) is not None]
    return pairs


def _hypothesis_name(label, k):
    if label == "claim":
        return f"claimed k = {fmt(k, 2)}"
    if label == "null":
        return f"no coupling, k = {fmt(k, 2)}"
    return f"{label}: k = {fmt(k, 2)}"


def distributions_table(document):
    """One row per (hypothesis, estimator): where the data's estimate falls among the mocks."""
    hypotheses = dig(document, "hypotheses")
    if not isinstance(hypotheses, dict):
        return None
    alpha = as_float(dig(document, "alpha")) or 0.0027
    rows = []
    for label, row in hypotheses.items():
        for name, cell in (row.items() if isinstance(row, dict) else []):
            if not isinstance(cell, dict) or "median" not in cell:
                continue
            p_value = as_float(dig(cell, "p_value"))
            rows.append([_hypothesis_name(label, dig(row, "k")), ESTIMATOR_NAMES.get(name, name),
                         fmt(dig(cell, "median")),
                         fmt_interval(dig(cell, "interval95")), fmt(dig(cell, "bias"), signed=True),
                         Cell(fmt_p(p_value), "bad" if p_value is not None and p_value < alpha else None),
                         fmt_p(dig(cell, "p_value_empirical")), fmt(dig(cell, "n_failed"))])
    if not rows:
        return None
    return table(["hypothesis", "fit", "median k of mocks", "95 % of mocks", "bias", "p (data)",
                  "p (empirical)", "failed fits"], rows, numeric=range(2, 8),
                 caption="The data's estimate among mocks of its own design simulated under each "
                         "hypothesis and fitted like the data. The verdict uses the selection-aware rows; "
                         "the plain rows show the bias of a fit that ignores the selection. p: two-sided "
                         f"predictive p-value (red below {fmt(alpha, 2)}); empirical: Monte Carlo rank.")


def _p_value_rows(document):
    """(where, p-value) pairs: every scalar leaf whose path names a p-value (unknown layouts)."""
    rows = []
    for path, value in flat_scalars(document, limit=400, skip=("versions", "inputs", "config", "draws",
                                                               "samples", "estimates")):
        leaf = path.rsplit(".", 1)[-1].lower()
        if ("p_value" in path.lower() or leaf in ("p", "pvalue")) and as_float(value) is not None:
            rows.append((path, value))
    return rows


def _p_value_table(document):
    """Fallback for unknown layouts: every p-value found in the file."""
    rows = [[Cell(path, "text"), Cell(fmt_p(value), "bad" if as_float(value) < 0.05 else None)]
            for path, value in _p_value_rows(document)]
    if not rows:
        return None
    return table(["where the observed estimate falls", "p-value"], rows,
                 caption="p-values of the observed k among mocks simulated under the claimed k and "
                         "under k = 0.")


def needs_table(document):
    """One row per hypothesis: its status, the fit's verdict on the same k, the offsets its mocks
    were drawn with and their pulls against their priors, the estimator's bias in its mocks."""
    hypotheses = dig(document, "hypotheses")
    if not isinstance(hypotheses, dict):
        return None
    rows = []
    for label, row in hypotheses.items():
        pulls = dig(row, "nuisance_pulls")
        if not isinstance(pulls, dict):
            continue
        values = dig(row, "nuisance_values", default={}) or {}
        offsets = "; ".join(f"{name} = {fmt(values.get(name), 2, signed=True)} dex "
                            f"({fmt(pull, 1, signed=True)}σ)" for name, pull in pulls.items()) or "none"
        far = any(abs(as_float(pull) or 0.0) > 2 for pull in pulls.values())
        status = dig(document, "verdict", label, "status")
        fit = dig(document, "fit_verdicts", label) or {}
        low, high = (dig(fit, "sigma_range") or [None, None])[:2]
        fit_text = (f"{dig(fit, 'verdict')} ({fmt(dig(fit, 'sigma'), 1)}σ; "
                    f"{fmt(low, 1)}–{fmt(high, 1)}σ from ⅓× to 3× the offset widths)") if fit else "–"
        bias = as_float(dig(row, "selection_aware", "bias_sigma"))
        rows.append([_hypothesis_name(label, dig(row, "k")),
                     Cell(status or "–", {"consistent": "good", "not consistent": "bad"}.get(status)),
                     Cell(fit_text, "text"), Cell(offsets, "bad" if far else "text"),
                     Cell(fmt(bias, 2, signed=True),
                          "bad" if bias is not None and abs(bias) > 0.5 else None)])
    if not rows:
        return None
    return table(["hypothesis", "status", "the fit's verdict on this k", "offsets of its mocks (pull)",
                  "estimator bias (σ of mocks)"], rows, numeric=[4],
                 caption="What each hypothesis needs. Pulls are offsets over their prior standard "
                         "deviation (red beyond 2); the bias is that of the selection-aware fit in the "
                         "hypothesis' own mocks (red beyond 0.5σ). \"Depends on assumptions\" follows "
                         "the fit's verdict rules on the same data and threshold.")


def challenge_context(document, folder=None):
    """Data of the template sections/challenge.html.j2: verdicts (status, text, tone), further
    summary lines, facts, the table of what each hypothesis needs, the table of mock distributions."""
    verdicts = [{"title": _hypothesis_name(label, dig(document, "hypotheses", label, "k")),
                 "status": status, "text": text, "tone": _tone(status, consistent)}
                for label, status, consistent, text in _verdicts(document)]
    shown = {v["text"] for v in verdicts}
    summary = dig(document, "summary")
    return {"verdicts": verdicts,
            "lines": [line for line in _lines(summary) if line not in shown] if isinstance(summary, list) else [],
            "facts": challenge_facts(document),
            "needs": needs_table(document),
            "table": distributions_table(document) or _p_value_table(document),
            "summary_md": folder.texts.get("summary.md") if folder is not None else None}


def challenge_warnings(document):
    out = [str(w) for w in dig(document, "warnings", default=[]) or [] if w and isinstance(w, str)]
    if dig(document, "selection_declared") is False:
        out.append("challenge: no selection is declared for any sample, so the selection-aware fit is "
                   "the plain fit and the verdict tests an unselected design")
    hypotheses = dig(document, "hypotheses")
    for label, row in (hypotheses.items() if isinstance(hypotheses, dict) else []):
        for name, cell in (row.items() if isinstance(row, dict) else []):
            failed = dig(cell, "n_failed")
            if isinstance(failed, int) and failed > 0:
                out.append(f"challenge: {failed} mock fits failed ({HYPOTHESIS_NAMES.get(label, label)}, "
                           f"{ESTIMATOR_NAMES.get(name, name)} fit)")
    return out


def challenge_glance(document):
    verdict = verdict_text(document)
    text = verdict or f"claimed k = {fmt(claimed_k(document), 2)} tested against mocks of the data"
    return f"{text} (k of the data by {estimator_words(document)})"
