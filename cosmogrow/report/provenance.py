"""The data of the page's provenance block: where every number comes from (inputs with their
hashes, files read, seeds, package versions, the configuration each command recorded)."""

import os
import platform
from pathlib import Path

from .. import __version__
from ..outputs import sha256_file
from .formatting import Cell, dig, fmt, pretty_json, table

RECORDED_KEYS = ("config", "campaign", "inputs", "cosmology", "truth")


def shown_path(path, base):
    """A path as the page shows it: relative to the report's folder `base` (None: as given).

    Recorded relative paths were relative to where the command ran, which the report cannot know;
    they are shown as recorded.
    """
    path = Path(path)
    if base is None:
        return str(path)
    if not path.is_absolute():
        if not path.exists():
            return str(path)
        path = path.resolve()
    return os.path.relpath(path, base)


def seed_of(document, kind):
    """The seed a results file records (a campaign keeps it in its campaign block)."""
    if kind == "campaign":
        return dig(document, "campaign", "seed", default=dig(document, "seed"))
    return dig(document, "seed", default=dig(document, "config", "seed"))


def versions_text(document):
    """'numpy 1.26, scipy 1.11, …' of a results file's versions block."""
    versions = dig(document, "versions")
    if not isinstance(versions, dict):
        return "not recorded in this results file"
    return ", ".join(f"{name} {version}" for name, version in versions.items() if version)


def inputs_table(document, base=None):
    """(path, SHA-256, rows, rows dropped) of the input files a results file records, or None."""
    rows = []
    inputs = dig(document, "inputs")
    if isinstance(inputs, list):
        for item in inputs:
            dropped = dig(item, "dropped")
            path = dig(item, "path")
            rows.append([Cell(shown_path(path, base) if isinstance(path, str) else fmt(path), "text mono"), Cell(fmt(dig(item, "sha256")), "text mono"),
                         fmt(dig(item, "rows")), fmt(len(dropped) if isinstance(dropped, list) else dropped)])
    elif isinstance(inputs, dict):
        for key, value in inputs.items():
            if isinstance(value, str) and key.endswith(("catalog", "posterior", "path", "config", "table")):
                rows.append([Cell(shown_path(value, base), "text mono"), Cell(inputs.get(f"{key}_sha256") or "–", "text mono"),
                             "–", "–"])
    return table(["input file", "SHA-256", "rows", "rows dropped"], rows, numeric=[2, 3]) if rows else None


def provenance_context(entries, folders, stamp, base=None):
    """Data of the provenance block of page.html.j2.

    Parameters
    ----------
    entries : list of dict, the page's results sections (folder, label, kind, name, document)
    folders : list of ResultFolder, every folder read
    stamp : str, ISO time of the report
    base : Path or None, the report's folder (paths are shown relative to it)
    """
    facts = [("report written", stamp), ("cosmogrow", __version__), ("Python", platform.python_version())]
    rows, blocks = [], []
    for entry in entries:
        doc, folder = entry["document"], entry["folder"]
        rows.append([entry["label"], entry["name"], fmt(seed_of(doc, entry["kind"])),
                     Cell(versions_text(doc), "text")])
        files = [f"{name}: {digest}" for name, digest in folder.hashes.items()]
        files += [f"{p.name}: {sha256_file(p)}" for p in folder.figures]
        recorded = [(key, pretty_json(dig(doc, key))) for key in RECORDED_KEYS
                    if dig(doc, key) not in (None, {}, [])]
        blocks.append({"heading": f"{entry['label']} ({entry['name']})", "inputs": inputs_table(doc, base),
                       "files": files, "recorded": recorded})
    seeds = table(["results folder", "kind", "seed", "package versions"], rows, numeric=[2],
                  caption="Seeds and versions recorded by each command.")
    return {"facts": facts, "folders": [shown_path(f.path, base) for f in folders], "seeds": seeds, "blocks": blocks}
