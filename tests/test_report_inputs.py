"""`cosmogrow report` checks every file it reads: an unreadable or malformed results file is named
in the page's warnings, the exit code is 3, and the page never reads as all clear."""

import json
import shutil

import pytest
from markupsafe import escape

from cosmogrow.cli.dispatch import main
from cosmogrow.report.validation import check_document

from report_fixtures import results_folders


@pytest.fixture(scope="module")
def folders(tmp_path_factory):
    return results_folders(tmp_path_factory)


def _edit_json(name, change):
    def edit(folder):
        path = folder / name
        document = json.loads(path.read_text())
        change(document)
        path.write_text(json.dumps(document))
    return edit


def _write(name, text):
    return lambda folder: (folder / name).write_bytes(text if isinstance(text, bytes) else text.encode())


def _set(keys, value):
    def change(document):
        target = document
        for key in keys[:-1]:
            target = target[key]
        target[keys[-1]] = value
    return change


# (results folder kind, how it is spoiled, file named, words of the warning)
CASES = {
    "fit without k": ("fit", _edit_json("summary.json", lambda d: d.pop("k")), "summary.json",
                      "key k is missing"),
    "k as text": ("fit", _edit_json("summary.json", _set(("k", "median"), "1.3")), "summary.json",
                  "key k.median: expected a finite number, got '1.3'"),
    "k NaN": ("fit", _write("summary.json", '{"k": {"median": NaN}, "parameters": {}}'), "summary.json",
              "key k.median: expected a finite number, got nan"),
    "reversed interval": ("fit", _edit_json("summary.json", _set(("k", "interval95"), [2.0, -1.0])),
                          "summary.json", "key k.interval95: expected two finite numbers"),
    "converged as text": ("fit", _edit_json("summary.json", _set(("convergence", "converged"), "yes")),
                          "summary.json", "key convergence.converged: expected true or false"),
    "garbage parquet": ("campaign", _write("results.parquet", b"PAR1 not a table"), "results.parquet",
                        "not a readable Parquet table"),
    "budget typed wrongly": ("budget", _edit_json("budget.json", _set(("omega_bh",), [0.1])), "budget.json",
                             "key omega_bh: expected a finite number, got [0.1]"),
    "budget k text": ("budget", _edit_json("budget.json", _set(("k",), "three")), "budget.json",
                      "key k: expected a finite number, got 'three'"),
    "remnants objects": ("remnants", _edit_json("remnants.json", _set(("objects",), "BH-1")), "remnants.json",
                         "key objects: expected a JSON list"),
    "null tests as text": ("nulltests", _edit_json("nulltests.json", _set(("tests",), "all fine")),
                           "nulltests.json", "key tests: expected a JSON object"),
    "claim as text": ("challenge", _edit_json("challenge.json", _set(("claim",), "3")), "challenge.json",
                      "key claim: expected a finite number"),
    "figure not a PNG": ("budget", _write("budget.png", b"GIF89a garbage"), "budget.png", "not a PNG image"),
    "summary of nothing": ("budget", _write("summary.json", '{"note": 1}'), "summary.json",
                           "neither a fit's summary (key k) nor a campaign's"),
    "broken JSON beside good": ("remnants", _write("budget.json", "{oops"), "budget.json",
                                "cannot be read as JSON"),
}


@pytest.mark.parametrize("case", sorted(CASES))
def test_malformed_input_is_named_in_the_warnings_and_exits_3(folders, tmp_path, capsys, case):
    kind, spoil, name, words = CASES[case]
    folder = tmp_path / kind
    shutil.copytree(folders[kind], folder)
    spoil(folder)
    out = tmp_path / "report.html"
    code = main(["report", str(folder), "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 3, err
    page = out.read_text()
    panel = page[page.index('id="warnings"'):page.index('id="contents"')]
    assert str(escape(f"{folder / name}: ")) in panel and str(escape(words)) in panel
    assert "No warnings" not in page and "no test failed" not in page
    assert name in err and "Traceback" not in err


def test_clean_inputs_exit_0(folders, tmp_path, capsys):
    out = tmp_path / "report.html"
    assert main(["report", str(folders["budget"]), str(folders["fit"]), "--out", str(out)]) == 0
    assert "input file /" not in out.read_text() and capsys.readouterr().err == ""


def test_check_document_accepts_nulls_and_names_nested_keys():
    assert check_document("fit", "s.json", {"k": {"median": 1.0, "interval68": None},
                                            "parameters": {"k": {"median": 1.0}},
                                            "tests": {"sigma_vs_k3": float("inf")}}) == []
    problems = check_document("fit", "s.json", {"k": {"median": 1.0}, "parameters": {"k": {"median": True}},
                                                "data": {"S": {"n": -3}}})
    assert problems == ["s.json: key parameters.k.median: expected a finite number, got True",
                        "s.json: key data.S.n: expected a whole number ≥ 0, got -3"]
    assert check_document("remnants", "r.json", {"k": 1, "limit_msun": 2.2, "objects": [3]}) == [
        "r.json: key objects[0]: expected a JSON object, got 3"]
