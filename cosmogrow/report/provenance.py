"""The data of the page's provenance block: where every number comes from (inputs with their
hashes, files read, seeds, package versions, the configuration each command recorded)."""

import platform

from .. import __version__
from ..outputs import sha256_file
from .formatting import Cell, dig, fmt, pretty_json, table

RECORDED_KEYS = ("config", "campaign", "inputs", "cosmology", "truth")


def seed_of(document, kind):
    """The seed a results file records (a campaign keeps it in its campaign block)."""
    if kind == "campaign":
        return dig(document, "campaign", "seed", default=dig(document, "seed"))
    return dig(document, "seed", default=dig(document, "config", "seed"))


def versions_text(document):
    """'numpy 1.26, scipy 1.11, …' of a results file's versions block, or an en dash."""
    versions = dig(document, "versions")
    if not isinstance(versions, dict):
        return "–"
    return ", ".join(f"{name} {version}" for name, version in versions.items() if version)


def inputs_table(document):
    """(path, SHA-256, rows, rows dropped) of the input files a results file records, or None."""
    rows = []
    inputs = dig(document, "inputs")
    if isinstance(inputs, list):
        for item in inputs:
            dropped = dig(item, "dropped")
            rows.append([Cell(fmt(dig(item, "path")), "text mono"), Cell(fmt(dig(item, "sha256")), "text mono"),
                         fmt(dig(item, "rows")), fmt(len(dropped) if isinstance(dropped, list) else dropped)])
    elif isinstance(inputs, dict):
        for key, value in inputs.items():
            if isinstance(value, str) and key.endswith(("catalog", "posterior", "path", "config", "table")):
                rows.append([Cell(value, "text mono"), Cell(inputs.get(f"{key}_sha256") or "–", "text mono"),
                             "–", "–"])
    return table(["input file", "SHA-256", "rows", "rows dropped"], rows, numeric=[2, 3]) if rows else None


def provenance_context(entries, folders, stamp):
    """Data of the provenance block of page.html.j2.

    Parameters
    ----------
    entries : list of dict, the page's results sections (folder, label, kind, name, document)
    folders : list of ResultFolder, every folder read
    stamp : str, ISO time of the report
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
        blocks.append({"heading": f"{entry['label']} ({entry['name']})", "inputs": inputs_table(doc),
                       "files": files, "recorded": recorded})
    seeds = table(["results folder", "kind", "seed", "package versions"], rows, numeric=[2],
                  caption="Seeds and versions recorded by each command.")
    return {"facts": facts, "folders": [str(f.path) for f in folders], "seeds": seeds, "blocks": blocks}
