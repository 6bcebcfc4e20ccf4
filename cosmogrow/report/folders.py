"""Find and read results folders for the web report, telling their kind by the files they hold.

Kinds (and the file that marks them):
  fit        summary.json with a posterior of k (beside samples.npz / chain.h5)
  campaign   summary.json with per-k "recovery" blocks, or results.parquet
  nulltests  nulltests.json
  challenge  challenge.json
  budget     budget.json
  remnants   remnants.json
Every file is checked before it is drawn (`validation`): a file that cannot be parsed, a key of the
wrong type, a campaign table that is not Parquet or a figure that is not a PNG is noted as a problem
of the folder (the page lists it among the warnings and the command exits with code 3), not an
exception, unless the folder then holds nothing readable at all.
"""

import json
import math
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import InputError
from ..outputs import sha256_file
from .sections import BY_KIND, KIND_ORDER, SECTIONS
from .validation import check_document, check_parquet

KIND_FILES = {s.kind: s.marker for s in SECTIONS if s.marker != "summary.json"}
FIT_FILES = ("samples.npz", "chain.h5")
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
TEXT_FILES = ("summary.md",)
MAX_TEXT_CHARS = 20000


@dataclass(frozen=True)
class ResultFolder:
    """One results folder as the report sees it.

    Attributes
    ----------
    path : Path
    label : str, the folder's name (shown escaped)
    documents : dict, kind -> parsed JSON (a dict) of that kind
    figures : tuple of Path, every PNG of the folder
    texts : dict, file name -> text (e.g. summary.md)
    hashes : dict, file name -> SHA-256 of every JSON file read
    problems : tuple of str, files that could not be read
    """

    path: Path
    label: str
    documents: dict = field(default_factory=dict)
    figures: tuple = ()
    texts: dict = field(default_factory=dict)
    hashes: dict = field(default_factory=dict)
    problems: tuple = ()

    @property
    def kinds(self):
        return tuple(kind for kind in KIND_ORDER if kind in self.documents)


def _read_json(path, problems):
    try:
        value = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        problems.append(f"{path.name}: cannot be read as JSON ({exc})")
        return None
    if not isinstance(value, dict):
        problems.append(f"{path.name}: expected a JSON object, got {type(value).__name__}")
        return None
    return value


def _summary_kind(summary, folder):
    """'fit', 'campaign' or None for the content of a summary.json."""
    if "recovery" in summary or (folder / "results.parquet").is_file():
        if "parameters" not in summary:
            return "campaign"
    if "k" in summary or "parameters" in summary or any((folder / name).is_file() for name in FIT_FILES):
        return "fit"
    return None


def _read_summary(folder, documents, problems):
    """Read summary.json (a fit's or a campaign's) into `documents`, departures into `problems`."""
    path = folder / "summary.json"
    summary = _read_json(path, problems) if path.is_file() else None
    if summary is None:
        return
    kind = _summary_kind(summary, folder)
    if kind is None:
        problems.append(f"{path.name}: neither a fit's summary (key k) nor a campaign's (key recovery)")
        return
    documents[kind] = summary
    problems += check_document(kind, path.name, summary)
    if kind == "campaign" and (folder / "results.parquet").is_file():
        problem = check_parquet(folder / "results.parquet")
        problems += [problem] if problem else []


def _figures(folder, problems):
    """Every PNG of the folder; a file that is not a PNG image is a problem, not a figure."""
    figures = []
    for path in sorted(p for p in folder.iterdir() if p.suffix.lower() == ".png" and p.is_file()):
        try:
            with path.open("rb") as stream:
                head = stream.read(8)
        except OSError as exc:
            problems.append(f"{path.name}: cannot be read ({exc.strerror or exc})")
            continue
        if head != PNG_SIGNATURE:
            problems.append(f"{path.name}: not a PNG image")
            continue
        figures.append(path)
    return tuple(figures)


def read_folder(path):
    """Read one results folder; None when it holds no recognisable results.

    Returns
    -------
    ResultFolder or None
    """
    folder = Path(path)
    documents, problems = {}, []
    _read_summary(folder, documents, problems)
    for kind, name in KIND_FILES.items():
        file = folder / name
        value = _read_json(file, problems) if file.is_file() else None
        if value is not None:
            documents[kind] = value
            problems += check_document(kind, name, value)
    if not documents:
        if problems:
            raise InputError(folder, "no readable results: " + "; ".join(problems))
        return None
    texts = {}
    for name in TEXT_FILES:
        file = folder / name
        if file.is_file() and "fit" not in documents:
            try:
                texts[name] = file.read_text(encoding="utf-8")[:MAX_TEXT_CHARS]
            except (OSError, UnicodeDecodeError) as exc:
                problems.append(f"{name}: cannot be read ({exc})")
    figures = _figures(folder, problems)
    hashes = {BY_KIND[kind].marker: sha256_file(folder / BY_KIND[kind].marker) for kind in documents}
    label = folder.resolve().name or str(folder)
    return ResultFolder(path=folder, label=label, documents=documents, figures=figures, texts=texts,
                        hashes=hashes, problems=tuple(problems))


def collect_folders(paths):
    """Read every given folder; a folder without results of its own stands for its subfolders.

    Parameters
    ----------
    paths : iterable of str or Path

    Returns
    -------
    list of ResultFolder, in the order given (subfolders sorted by name)

    Raises
    ------
    InputError
        A path does not exist, is not a folder, or neither it nor its subfolders hold results.
    """
    found = []
    paths = list(paths)
    if not paths:
        raise InputError("<report>", "no results folders given")
    for path in paths:
        folder = Path(path)
        if not folder.exists():
            raise InputError(folder, "no such folder")
        if not folder.is_dir():
            raise InputError(folder, "not a folder; expected a results folder of a cosmogrow command")
        result = read_folder(folder)
        if result is not None:
            found.append(result)
            continue
        children = [read_folder(child) for child in sorted(folder.iterdir()) if child.is_dir()
                    and not child.name.startswith(".")]
        children = [child for child in children if child is not None]
        if not children:
            raise InputError(folder, "holds no recognisable results (expected summary.json, "
                                     "nulltests.json, challenge.json, budget.json or remnants.json)")
        found.extend(children)
    return found


def read_truth(path):
    """The true k of simulated data from a truth file (JSON with a finite number under "k").

    Parameters
    ----------
    path : str or Path, e.g. demo_data/truth.json

    Returns
    -------
    dict with "k" (float) and "source" (the file's name)

    Raises
    ------
    InputError
        The file cannot be read, is not a JSON object, or has no finite number under "k".
    """
    path = Path(path)
    try:
        value = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise InputError(path, f"cannot be read as JSON ({getattr(exc, 'strerror', None) or exc})") from None
    if not isinstance(value, dict):
        raise InputError(path, f"expected a JSON object with the true k, got {type(value).__name__}")
    k = value.get("k")
    if isinstance(k, bool) or not isinstance(k, (int, float)) or not math.isfinite(k):
        raise InputError(path, "expected a finite number for the true k", column="k", value=k)
    return {"k": float(k), "source": path.name}
