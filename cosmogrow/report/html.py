"""One self-contained web page from any set of cosmogrow results folders.

`build_report(result_dirs, out_path)` reads fit, campaign, null-test, challenge, budget and remnant
folders (told apart by the files they hold) and writes a single HTML file from the Jinja2 templates
in templates/ (page.html.j2 and one sections/<kind>.html.j2 per kind of results), with autoescaping:
every text that comes from a catalogue, a configuration or a results file is escaped. The page has
inline CSS only, no script, no external file, font or network request (figures are base64 data
URIs); a Content-Security-Policy forbids any.
"""

import os
import tempfile
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path

import jinja2

from .. import __version__
from ..errors import ConfigError
from . import fit_section, method_text
from .folders import collect_folders, read_truth
from .formatting import Numbering, figure, safely
from .headline import headline_context, order_key
from .provenance import provenance_context, shown_path
from .sections import BY_KIND
from .style import INK, PALETTE

CSP = "default-src 'none'; img-src data:; style-src 'unsafe-inline'; base-uri 'none'; form-action 'none'"
TEMPLATES = Path(__file__).parent / "templates"


def environment():
    """The Jinja2 environment of the page: templates/ of this package, autoescaping everywhere,
    undefined names an error (a template typo must not pass silently)."""
    return jinja2.Environment(loader=jinja2.FileSystemLoader(TEMPLATES), autoescape=True,
                              undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True)


@dataclass(frozen=True)
class WrittenReport:
    """A written page and the problems of its inputs.

    Attributes
    ----------
    path : Path, the HTML file written
    problems : tuple of str, one line per input file that could not be read or is malformed
        (each also listed among the page's warnings)
    """

    path: Path
    problems: tuple = ()


def build_report(result_dirs, out_path, *, title=None, generated_at=None, truth=None) -> WrittenReport:
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
    truth : str or Path, optional
        Truth file of simulated data (JSON with the true "k"); the page then shows the true k.

    Returns
    -------
    WrittenReport
        The page's path and the problems of its inputs (unreadable or malformed files).

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
    truth = read_truth(truth) if truth is not None else None
    page = render_page(folders, title=title, generated_at=generated_at, truth=truth,
                       base=out_path.absolute().parent)
    try:
        _write_atomically(out_path, page)
    except OSError as exc:
        raise ConfigError(f"{out_path}: cannot write the report ({exc.strerror or exc})") from None
    problems = tuple(f"{folder.path / problem}" for folder in folders for problem in folder.problems)
    return WrittenReport(out_path, problems)


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


def _figures_of(folder, kind):
    """Figures of one section: its own PNGs in their order, then (in the folder's first section
    only) every other PNG of the folder; unreadable files as a text note."""
    present = {p.name: p for p in folder.figures}
    chosen = [(present[name], caption, wide) for name, caption, wide in BY_KIND[kind].figures
              if name in present]
    if kind == folder.kinds[0]:
        claimed = {name for k in folder.kinds for name, _, _ in BY_KIND[k].figures}
        chosen += [(path, f"Figure {path.stem.replace('_', ' ')} of this folder.", False)
                   for name, path in sorted(present.items()) if name not in claimed]
    figures = []
    for path, caption, wide in chosen:
        try:
            figures.append(figure(path.read_bytes(), caption, name=path.name, wide=wide))
        except OSError as exc:
            figures.append(f"{path.name} could not be read ({exc}).")
    return figures


def _entry(folder, label, kind, index, base):
    """One results section of the page: who, what, its warnings, its template's data, figures."""
    section, document = BY_KIND[kind], folder.documents[kind]
    warnings, error = safely(section.warnings, document, fallback=[])
    if error:
        warnings = [f"some warnings of this {section.name} could not be read ({error})"]
    if kind == folder.kinds[0]:
        warnings += [f"input file {folder.path / problem}" for problem in folder.problems]
    context, error = safely(section.context, document, folder, fallback={})
    return {"folder": folder, "label": label, "kind": kind, "name": section.name, "title": section.title,
            "colour": section.colour, "document": document, "anchor": f"r{index}", "path": shown_path(folder.path, base),
            "warnings": warnings, "context": context, "error": error,
            "pills": fit_section.status_pills(document) if kind == "fit" else [],
            "figures": _figures_of(folder, kind)}


def _entries(folders, base):
    """The page's results sections: grouped by kind (fits first), the answer fit before the fits
    shown for comparison; otherwise in the order the folders were given."""
    entries = []
    for folder, label in zip(folders, _labels(folders)):
        for kind in folder.kinds:
            entries.append(_entry(folder, label, kind, len(entries) + 1, base))
    order = list(BY_KIND)
    return sorted(entries, key=lambda e: (order.index(e["kind"]),
                                          order_key(e) if e["kind"] == "fit" else ()))


def render_page(folders, *, title=None, generated_at=None, truth=None, base=None):
    """The HTML text of the report of already-read folders (see `folders.collect_folders`);
    `truth` is None or a dict from `folders.read_truth`; paths are shown relative to the folder
    `base` of the page (None: as given)."""
    stamp = (generated_at or datetime.now(timezone.utc)).isoformat(timespec="seconds")
    entries = _entries(folders, base)
    kinds = [kind for kind in BY_KIND if any(e["kind"] == kind for e in entries)]
    subtitle = (f"{len(folders)} results folder{'s' if len(folders) != 1 else ''} "
                f"({', '.join(BY_KIND[k].name for k in kinds)}) · generated {stamp} · cosmogrow {__version__}")
    palette = dict(zip(("teal", "ochre", "plum", "slate", "brick", "olive"), PALETTE), ink=INK)
    return environment().get_template("page.html.j2").render(
        title=title or "cosmogrow report", subtitle=subtitle, stamp=stamp, version=__version__, csp=CSP,
        palette=palette, entries=entries, headline=headline_context(entries, truth),
        warnings=[(e, text) for e in entries for text in e["warnings"]],
        method=method_text, provenance=provenance_context(entries, folders, stamp, base), numbering=Numbering())


__all__ = ["WrittenReport", "build_report", "render_page"]
