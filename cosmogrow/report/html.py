"""One self-contained web page from any set of cosmogrow results folders.

`build_report(result_dirs, out_path)` reads fit, campaign, null-test, challenge, budget and remnant
folders (told apart by the files they hold), and writes a single HTML file: a headline with k, its
intervals, significance and convergence; every warning in one prominent list; per folder its
tables and every PNG figure embedded as a base64 data URI; the method, caveats and references; and
the provenance of every number (input hashes, configuration, seeds, versions, time).
The page has inline CSS only, no script, no external file, font or network request; a
Content-Security-Policy forbids any. Every text that comes from a catalogue, a configuration or a
results file is escaped.
"""

import os
import platform
import tempfile
from datetime import datetime, timezone
from pathlib import Path

from .. import __version__
from ..errors import ConfigError
from ..outputs import sha256_file
from . import (budget_section, calibration_section, checks_section, fit_section, forecast_section,
               method_text)
from .folders import KIND_TITLES, collect_folders
from .htmlkit import (Cell, Markup, Numbering, definition_list, details, dig, esc, figure, fmt,
                      fmt_interval, fmt_p, join, pretty_json, table, tag)
from .page_css import KIND_COLOURS, stylesheet

CSP = "default-src 'none'; img-src data:; style-src 'unsafe-inline'; base-uri 'none'; form-action 'none'"
KIND_NAMES = {"fit": "fit", "campaign": "calibration campaign", "nulltests": "null tests",
              "challenge": "challenge", "forecast": "forecast", "budget": "budget", "remnants": "remnants"}
# kind -> (body(document, numbering, folder), warnings(document), one-line glance(document) or None)
SECTIONS = {
    "fit": (fit_section.fit_body, fit_section.fit_warnings, None),
    "campaign": (calibration_section.campaign_body, calibration_section.campaign_warnings,
                 calibration_section.campaign_glance),
    "nulltests": (checks_section.nulltests_body, checks_section.nulltests_warnings,
                  checks_section.nulltests_glance),
    "challenge": (checks_section.challenge_body, checks_section.challenge_warnings,
                  checks_section.challenge_glance),
    "forecast": (forecast_section.forecast_body, forecast_section.forecast_warnings,
                 forecast_section.forecast_glance),
    "budget": (budget_section.budget_body, budget_section.budget_warnings, budget_section.budget_glance),
    "remnants": (budget_section.remnants_body, budget_section.remnants_warnings,
                 budget_section.remnants_glance),
}
FIGURES = {  # kind -> (file name, caption, full width)
    "fit": (("corner.png", "Posterior of every parameter; lines mark the 16th, 50th and 84th percentiles.", True),
            ("relation.png", "Black-hole against host stellar mass by sample, with the fitted relation drawn "
                             "at each sample's median redshift.", False),
            ("offsets.png", "Offsets of the black-hole masses from the reference-epoch relation against "
                            "redshift, with the posterior curve −k log₁₀(1+z).", False),
            ("crosscheck.png", "Distribution-matching cross-check: p-value of each two-sample test "
                               "against k, with the posterior of k for comparison.", True)),
    "campaign": (("recovery.png", "Recovered against injected k; the dashed line is an unbiased estimator.", False),
                 ("coverage.png", "Coverage of the 68 % and 95 % intervals against injected k, with "
                                  "binomial 3σ bands around the nominal level.", False),
                 ("sbc_ranks.png", "Simulation-based calibration: ranks of the true k among the posterior "
                                   "draws, flat for a calibrated posterior.", False)),
    "nulltests": (("nulltests.png", "Null tests: the data's statistic against its distribution under "
                                    "each null hypothesis.", True),),
    "challenge": (("challenge.png", "The observed k among mocks simulated under the claimed k and under "
                                    "k = 0, fitted plainly and with the selection modelled.", True),),
    "forecast": (("forecast.png", "Forecast σ(k) and power against the number of objects (all samples "
                                  "scaled), with the mocks' spread of k at the planned size; σ(k) against "
                                  "the size of the sample that breaks the k-offset degeneracy.", True),),
    "budget": (("budget.png", "Density of the coupled black-hole population against redshift, compared "
                              "with dark energy, and its effective equation of state.", True),),
    "remnants": (("remnants.png", "Birth masses of the stellar-mass black holes against the neutron-star "
                                  "limit.", True),),
}
_RENDER_ERRORS = (KeyError, TypeError, ValueError, AttributeError, IndexError, ZeroDivisionError)


def build_report(result_dirs, out_path, *, title=None, generated_at=None):
    """Collect results folders into one self-contained HTML page.

    Parameters
    ----------
    result_dirs : iterable of str or Path
        Results folders of cosmogrow commands (fit, inject, nulltest, challenge, budget, remnants).
        A folder holding no results of its own stands for its result subfolders.
    out_path : str or Path
        The HTML file to write (atomically: a temporary file beside it, then renamed).
    title : str, optional
        Page title (default: "cosmogrow report").
    generated_at : datetime, optional
        Time stamp of the report (default: now, UTC).

    Returns
    -------
    Path of the written page.

    Raises
    ------
    InputError
        A folder does not exist or holds no recognisable results.
    ConfigError
        `out_path` is a folder or cannot be written.
    """
    out_path = Path(out_path)
    if out_path.is_dir():
        raise ConfigError(f"{out_path}: is a folder; expected the path of the HTML file to write")
    folders = collect_folders(result_dirs)
    page = render_page(folders, title=title, generated_at=generated_at)
    try:
        _write_atomically(out_path, page)
    except OSError as exc:
        raise ConfigError(f"{out_path}: cannot write the report ({exc.strerror or exc})") from None
    return out_path


def _write_atomically(path, text):
    """Write a temporary file beside `path`, then rename it over `path` (never half-written)."""
    path.parent.mkdir(parents=True, exist_ok=True)
    handle, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(handle, "w", encoding="utf-8") as stream:
            stream.write(text)
            stream.flush()
            os.fsync(stream.fileno())
        os.chmod(tmp, 0o644)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def _labels(folders):
    """Display names of the folders: the folder name, with its parent where names repeat."""
    names = [f.label for f in folders]
    return [f"{Path(f.path).resolve().parent.name}/{f.label}" if names.count(f.label) > 1 else f.label
            for f in folders]


def _safely(function, *args, fallback=None):
    """Call a renderer; on an unexpected file layout return (fallback, the error text)."""
    try:
        return function(*args), None
    except _RENDER_ERRORS as exc:
        return fallback, f"{type(exc).__name__}: {exc}"


def _entries(folders):
    """One entry per (folder, kind): label, anchor, document, warnings."""
    entries = []
    for folder, label in zip(folders, _labels(folders)):
        for kind in folder.kinds:
            document = folder.documents[kind]
            warnings, error = _safely(SECTIONS[kind][1], document, fallback=[])
            if error:
                warnings = [f"some warnings of this {KIND_NAMES[kind]} could not be read ({error})"]
            if kind == folder.kinds[0]:
                warnings += [f"could not read {problem}" for problem in folder.problems]
            entries.append({"folder": folder, "label": label, "kind": kind, "document": document,
                            "anchor": f"r{len(entries) + 1}", "warnings": warnings})
    return entries


def render_page(folders, *, title=None, generated_at=None):
    """The HTML text of the report of already-read folders (see `folders.collect_folders`)."""
    title = title or "cosmogrow report"
    generated_at = generated_at or datetime.now(timezone.utc)
    stamp = generated_at.isoformat(timespec="seconds")
    entries = _entries(folders)
    numbering = Numbering()
    sections = [_result_section(entry, numbering) for entry in entries]
    kinds = sorted({e["kind"] for e in entries}, key=list(KIND_NAMES).index)
    subtitle = (f"{len(folders)} results folder{'s' if len(folders) != 1 else ''} "
                f"({', '.join(KIND_NAMES[k] for k in kinds)}) · generated {stamp} · cosmogrow {__version__}")
    masthead = tag("header", tag("div", tag("p", Markup("cosmo<b>grow</b> · coupled black-hole growth"),
                                            cls="brand")
                                 + tag("h1", title) + tag("p", subtitle, cls="sub"), cls="inner"),
                   cls="masthead")
    body = join([_headline(entries), _warnings_panel(entries), _contents(entries), join(sections),
                 _method_section(), _references_section(), _provenance_section(entries, folders, stamp)])
    footer = tag("footer", f"Written by cosmogrow {__version__} on {stamp}. Self-contained: every figure "
                           "is embedded; the page loads nothing from the network.")
    head = join([Markup('<meta charset="utf-8">'),
                 Markup(f'<meta http-equiv="Content-Security-Policy" content="{esc(CSP)}">'),
                 Markup('<meta name="viewport" content="width=device-width, initial-scale=1">'),
                 Markup(f'<meta name="generator" content="cosmogrow {esc(__version__)}">'),
                 tag("title", title), tag("style", Markup(stylesheet()))])
    return ("<!DOCTYPE html>\n" + str(tag("html", tag("head", head) + tag(
        "body", masthead + tag("main", body) + footer), lang="en")) + "\n")


# --- headline, warnings, contents -------------------------------------------------------------

def _headline(entries):
    fits = [e for e in entries if e["kind"] == "fit"]
    parts = [tag("p", "Headline", cls="kicker"),
             tag("h2", "The coupling exponent k" if fits else "Results at a glance")]
    if fits:
        parts.append(tag("div", join(_safely(fit_section.fit_card, e["label"], e["document"], e["anchor"],
                                             len(e["warnings"]), fallback=Markup(""))[0] for e in fits),
                         cls="cards"))
        if len(fits) > 1:
            parts.append(_comparison_table(fits))
    else:
        parts.append(tag("p", "No fit among these folders; the page shows the other results.", cls="note"))
    glance = []
    for entry in entries:
        function = SECTIONS[entry["kind"]][2]
        if function is None:
            continue
        text, _ = _safely(function, entry["document"], fallback="see its section")
        link = tag("a", f"{KIND_NAMES[entry['kind']]} · {entry['label']}", href=f"#{entry['anchor']}")
        glance.append(tag("li", tag("span", link, cls="what") + esc(text),
                          style=f"--accent: {KIND_COLOURS[entry['kind']]}"))
    if glance:
        parts.append(tag("ul", join(glance), cls="glance"))
    return tag("section", join(parts), id="headline", cls="block headline")


def _comparison_table(fits):
    rows = []
    for entry in fits:
        doc = entry["document"]
        k = dig(doc, "k", default={})
        conv = dig(doc, "convergence", "converged")
        rows.append([entry["label"], Cell(fit_section.fit_kind_label(doc), "text"), fmt(dig(k, "median"), 2),
                     fmt_interval(dig(k, "interval68"), 2), fmt_interval(dig(k, "interval95"), 2),
                     fmt_p(dig(doc, "tests", "p_k_le_0")), fmt(dig(doc, "tests", "sigma_vs_k0"), 2),
                     Cell(fmt(conv), "good" if conv else ("bad" if conv is False else None))])
    return table(["fit", "likelihood", "median k", "68 % interval", "95 % interval", "P(k ≤ 0)",
                  "σ against k = 0", "converged"], rows, numeric=range(2, 8),
                 caption="k from every fit on this page, side by side.")


def _warnings_panel(entries):
    items = []
    for entry in entries:
        for text in entry["warnings"]:
            where = tag("a", f"{KIND_NAMES[entry['kind']]} · {entry['label']}:", href=f"#{entry['anchor']}",
                        cls="where")
            items.append(tag("li", where + esc(text)))
    if not items:
        return tag("section", tag("h2", "No warnings") + tag(
            "p", "The fits converged, selection is modelled where declared, and no test failed. The "
                 "caveats below still apply."), id="warnings", cls="block all-clear")
    heading = tag("h2", f"Read before quoting: {len(items)} warning{'s' if len(items) != 1 else ''}")
    return tag("section", tag("p", "Warnings", cls="kicker") + heading + tag("ol", join(items)),
               id="warnings", cls="block warnings")


def _contents(entries):
    items = [tag("li", tag("a", entry["label"], href=f"#{entry['anchor']}") + " "
                 + tag("span", f"({KIND_NAMES[entry['kind']]})", cls="kind")) for entry in entries]
    items += [tag("li", tag("a", name, href=f"#{anchor}")) for name, anchor in
              (("Method and caveats", "method"), ("References", "references"), ("Provenance", "provenance"))]
    return tag("nav", tag("h2", "Contents") + tag("ol", join(items)), cls="block toc", id="contents")


# --- one results section ----------------------------------------------------------------------

def _figures_of(entry):
    """(path, caption, wide) of the PNGs shown in this entry's section: its own figures in their
    order, then (in the folder's first section only) every other PNG of the folder."""
    folder, kind = entry["folder"], entry["kind"]
    present = {p.name: p for p in folder.figures}
    chosen = [(present[name], caption, wide) for name, caption, wide in FIGURES.get(kind, ())
              if name in present]
    if kind == folder.kinds[0]:
        claimed = {name for k in folder.kinds for name, _, _ in FIGURES.get(k, ())}
        chosen += [(path, f"Figure {path.stem.replace('_', ' ')} of this folder.", False)
                   for name, path in sorted(present.items()) if name not in claimed]
    return chosen


def _result_section(entry, numbering):
    kind, document = entry["kind"], entry["document"]
    body, error = _safely(SECTIONS[kind][0], document, numbering, entry["folder"], fallback=Markup(""))
    if error:
        body = tag("p", f"Part of this section could not be shown: the file's layout is not the one "
                        f"this version of cosmogrow knows ({error}).", cls="note")
    figures = []
    for path, caption, wide in _figures_of(entry):
        try:
            data = path.read_bytes()
        except OSError as exc:
            figures.append(tag("p", f"{path.name} could not be read ({exc}).", cls="note"))
            continue
        figures.append(figure(data, caption, number=numbering.figure, name=path.name, wide=wide))
    pills = fit_section.status_pills(document) if kind == "fit" else Markup("")
    head = (tag("p", f"{KIND_NAMES[kind]} · {entry['label']}", cls="kicker")
            + tag("h2", KIND_TITLES[kind]) + tag("p", pills, cls="section-pills")
            + tag("p", "results folder " + tag("span", str(entry["folder"].path), cls="mono"), cls="where"))
    parts = [head, body]
    if figures:
        parts.append(tag("div", join(figures), cls="figs"))
    return tag("section", join(parts), id=entry["anchor"], cls=f"block result kind-{kind}",
               style=f"--accent: {KIND_COLOURS[kind]}")


# --- method, references, provenance -----------------------------------------------------------

def _method_section():
    paragraphs = join(tag("p", text) for text in method_text.METHOD)
    caveats = tag("div", tag("h3", "Caveats") + tag("ul", join(tag("li", c) for c in method_text.CAVEATS)),
                  cls="caveats")
    return tag("section", tag("p", "Method", cls="kicker") + tag("h2", "How k is measured, and what "
                                                                      "it assumes")
               + paragraphs + caveats, id="method", cls="block method")


def _references_section():
    items = [tag("li", f"{authors}. {subject}. " + tag("span", journal, cls="journal"))
             for authors, subject, journal in method_text.REFERENCES]
    return tag("section", tag("h2", "References") + tag("ol", join(items), cls="references"),
               id="references", cls="block")


def _seed_of(document, kind):
    if kind == "campaign":
        return dig(document, "campaign", "seed", default=dig(document, "seed"))
    return dig(document, "seed", default=dig(document, "config", "seed"))


def _versions_text(document):
    versions = dig(document, "versions")
    if not isinstance(versions, dict):
        return "–"
    return ", ".join(f"{name} {version}" for name, version in versions.items() if version)


def _inputs_rows(entry):
    """(path, SHA-256, rows, rows dropped) of the input files a results file records."""
    doc = entry["document"]
    rows = []
    inputs = dig(doc, "inputs")
    if isinstance(inputs, list):
        for item in inputs:
            dropped = dig(item, "dropped")
            rows.append([Cell(fmt(dig(item, "path")), "text mono"), Cell(fmt(dig(item, "sha256")), "text mono"),
                         fmt(dig(item, "rows")), fmt(len(dropped) if isinstance(dropped, list) else dropped)])
    elif isinstance(inputs, dict):
        for key, value in inputs.items():
            if isinstance(value, str) and key.endswith(("catalog", "posterior", "path", "config", "table")):
                digest = inputs.get(f"{key}_sha256") or "–"
                rows.append([Cell(value, "text mono"), Cell(digest, "text mono"), "–", "–"])
    return rows


def _provenance_section(entries, folders, stamp):
    facts = definition_list([("report written", stamp), ("cosmogrow", __version__),
                             ("Python", platform.python_version()),
                             ("folders read", join([tag("span", str(f.path), cls="mono") for f in folders],
                                                   Markup("<br>")))])
    rows, blocks = [], []
    for entry in entries:
        doc, folder = entry["document"], entry["folder"]
        files = [f"{name}: {digest}" for name, digest in folder.hashes.items()]
        rows.append([entry["label"], KIND_NAMES[entry["kind"]], fmt(_seed_of(doc, entry["kind"])),
                     Cell(_versions_text(doc), "text")])
        parts = []
        inputs = _inputs_rows(entry)
        if inputs:
            parts.append(table(["input file", "SHA-256", "rows", "rows dropped"], inputs, numeric=[2, 3]))
        figure_hashes = [f"{p.name}: {sha256_file(p)}" for p in folder.figures]
        parts.append(tag("p", tag("span", "Files read (SHA-256)", cls="label") + Markup("<br>")
                         + join([tag("span", line, cls="mono") for line in files + figure_hashes],
                                Markup("<br>"))))
        for key in ("config", "campaign", "inputs", "cosmology", "truth"):
            value = dig(doc, key)
            if value not in (None, {}, []):
                parts.append(details(f"{key} as recorded", pretty_json(value)))
        blocks.append(tag("div", tag("h3", f"{entry['label']} ({KIND_NAMES[entry['kind']]})") + join(parts)))
    summary = table(["results folder", "kind", "seed", "package versions"], rows, numeric=[2],
                    caption="Seeds and versions recorded by each command.")
    return tag("section", tag("p", "Provenance", cls="kicker") + tag("h2", "Where every number comes from")
               + facts + summary + join(blocks), id="provenance", cls="block provenance")


__all__ = ["build_report", "render_page"]
