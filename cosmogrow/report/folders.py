"""Find and read results folders for the web report, telling their kind by the files they hold.

Kinds (and the file that marks them):
  fit        summary.json with a posterior of k (beside samples.npz / chain.h5)
  campaign   summary.json with per-k "recovery" blocks, or results.parquet
  nulltests  nulltests.json
  challenge  challenge.json
  budget     budget.json
  remnants   remnants.json
  forecast   forecast.json
JSON is read defensively: a file that cannot be parsed is noted as a problem of the folder, not
an exception, unless the folder then holds nothing readable at all.
"""

import json
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import InputError
from ..outputs import sha256_file

KIND_FILES = {"nulltests": "nulltests.json", "challenge": "challenge.json", "budget": "budget.json",
              "remnants": "remnants.json", "forecast": "forecast.json"}
KIND_ORDER = ("fit", "campaign", "nulltests", "challenge", "forecast", "budget", "remnants")
KIND_TITLES = {"fit": "Posterior of k", "campaign": "Calibration by injection and recovery",
               "nulltests": "Null tests", "challenge": "Does a claimed k survive the selection?",
               "budget": "Dark-energy budget of coupled black holes",
               "remnants": "Stellar-remnant test",
               "forecast": "Forecast: how well would the planned observations measure k?"}
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
    if isinstance(summary.get("recovery"), dict) or (folder / "results.parquet").is_file():
        if not isinstance(summary.get("parameters"), dict):
            return "campaign"
    if isinstance(summary.get("k"), dict) or isinstance(summary.get("parameters"), dict):
        return "fit"
    return None


def read_folder(path):
    """Read one results folder; None when it holds no recognisable results.

    Returns
    -------
    ResultFolder or None
    """
    folder = Path(path)
    documents, hashes, problems = {}, {}, []
    summary_path = folder / "summary.json"
    if summary_path.is_file():
        summary = _read_json(summary_path, problems)
        if summary is not None:
            kind = _summary_kind(summary, folder)
            if kind:
                documents[kind] = summary
                hashes[summary_path.name] = sha256_file(summary_path)
    for kind, name in KIND_FILES.items():
        file = folder / name
        if file.is_file():
            value = _read_json(file, problems)
            if value is not None:
                documents[kind] = value
                hashes[name] = sha256_file(file)
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
    figures = tuple(sorted(p for p in folder.iterdir() if p.suffix.lower() == ".png" and p.is_file()))
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
                                     "nulltests.json, challenge.json, forecast.json, budget.json or "
                                     "remnants.json)")
        found.extend(children)
    return found
