"""The web report and the LaTeX table: escaping, self-containment, every figure, defensive reading,
balanced LaTeX whose numbers equal summary.json, and the `cosmogrow report` command's exit codes."""

import base64
import copy
import html
import json
import re
import shutil
from html.parser import HTMLParser

import pytest

from cosmogrow.cli.dispatch import main
from cosmogrow.errors import ConfigError, InputError
from cosmogrow.report.fit_section import parameter_label
from cosmogrow.report.folders import collect_folders
from cosmogrow.report.html import build_report
from markupsafe import escape

from cosmogrow.report.formatting import fmt, fmt_sig
from cosmogrow.report.latex import escape_latex, parameter_symbol, posterior_table

from report_fixtures import (EVIL_METHOD, EVIL_REMNANT, EVIL_SAMPLE, EVIL_TEST_NOTE,
                             results_folders)

def esc(text):
    """Text as the page's template engine escapes it."""
    return str(escape(text))


EVIL_TITLE = "<script>alert('title')</script>"
VOID = {"meta", "img", "br", "hr", "link", "input", "source", "wbr", "col", "area", "base"}


@pytest.fixture(scope="session")
def folders(tmp_path_factory):
    return results_folders(tmp_path_factory)


@pytest.fixture(scope="session")
def page(folders, tmp_path_factory):
    out = tmp_path_factory.mktemp("page") / "report.html"
    written = build_report(list(folders.values()), out, title=EVIL_TITLE)
    assert written.path == out and written.problems == ()
    return out.read_text(encoding="utf-8")


def _summary(folders):
    return json.loads((folders["fit"] / "summary.json").read_text())


# ----- safety ------------------------------------------------------------------------------------
def test_hostile_text_is_shown_escaped_never_as_markup(page):
    # The planted strings reach the page (sample name, method name inside a warning, a remnant's
    # object id, a null test's note, the title) but only in escaped form.
    for text in (EVIL_SAMPLE, EVIL_METHOD, EVIL_REMNANT, EVIL_TEST_NOTE, EVIL_TITLE):
        assert esc(text) in page, text
    assert "<script" not in page.lower()
    assert "<img src=x" not in page and 'onerror="' not in page


def test_warning_with_markup_is_escaped_in_the_warnings_panel(page):
    panel = page[page.index('id="warnings"'):page.index('id="contents"')]
    assert "degenerate" in panel
    assert esc(EVIL_METHOD) in panel


def test_page_is_self_contained(page):
    assert not re.search(r'(src|href)\s*=\s*"(https?:|//)', page, flags=re.I)
    assert "@import" not in page and "url(" not in page
    for value in re.findall(r'\ssrc="([^"]*)"', page):
        assert value.startswith("data:image/png;base64,")
    for value in re.findall(r'\shref="([^"]*)"', page):
        assert value.startswith("#"), value
    policy = re.search(r'http-equiv="Content-Security-Policy" content="([^"]+)"', page)
    assert policy and html.unescape(policy.group(1)).startswith("default-src 'none'; img-src data:;")


def test_every_figure_of_every_folder_is_embedded(page, folders):
    embedded = {}
    pattern = r'<img src="data:image/png;base64,([^"]+)"[^>]*data-file="([^"]+)"'
    for payload, name in re.findall(pattern, page):
        embedded.setdefault(name, []).append(base64.b64decode(payload))
    expected = [path for folder in folders.values() for path in sorted(folder.glob("*.png"))]
    assert len(expected) >= 11
    assert page.count("<img ") == len(expected)
    for path in expected:
        assert path.read_bytes() in embedded.get(path.name, []), path


class _Balance(HTMLParser):
    def __init__(self):
        super().__init__()
        self.stack, self.errors = [], []

    def handle_starttag(self, tag, attrs):
        if tag not in VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append((tag, list(self.stack[-3:])))
        else:
            self.stack.pop()


def test_page_is_well_formed_html(page):
    checker = _Balance()
    checker.feed(page)
    assert checker.errors == [] and checker.stack == []
    assert page.startswith("<!DOCTYPE html>")


# ----- content -----------------------------------------------------------------------------------
def test_headline_shows_k_intervals_significance_and_convergence(page, folders):
    summary = _summary(folders)
    headline = page[page.index('id="headline"'):page.index('id="warnings"')]
    assert fmt(summary["k"]["median"], 2) in headline
    lo, hi = summary["k"]["interval95"]
    assert f"[{fmt(lo, 2)}, {fmt(hi, 2)}]" in headline
    assert f"{fmt(summary['tests']['sigma_vs_k0'], 2)} σ" in headline
    assert ("converged" in headline) and ("no selection declared" in headline)
    # one line per other kind of results
    for words in ("calibration campaign", "null tests", "challenge", "budget", "remnants"):
        assert words in headline


def test_tables_of_every_kind_are_present(page, folders):
    summary = _summary(folders)
    for sample in summary["data"]:
        assert esc(sample) in page
    for caption in ("The data:", "Posterior of every parameter", "Hypothesis tests on k",
                    "Convergence of the ensemble sampler", "Assumption-light cross-check",
                    "Recovery of injected k", "Simulation-based calibration", "Null tests:",
                    esc("The data's estimate among mocks"), "Comoving density today", "Birth mass of each black hole",
                    "Seeds and versions"):
        assert caption in page, caption
    assert page.count("<table") >= 12


def test_warnings_cover_failed_tests_miscalibration_selection_and_degeneracy(page):
    panel = page[page.index('id="warnings"'):page.index('id="contents"')]
    assert esc("' FAILED: ") + esc(EVIL_TEST_NOTE) in panel
    assert esc("estimator 'plain' is not calibrated") in panel
    assert "challenge: no selection is declared" in panel
    assert "no selection is declared for any sample" in panel


def test_challenge_verdicts_are_shown(page, folders):
    challenge = json.loads((folders["challenge"] / "challenge.json").read_text())
    headline = page[page.index('id="headline"'):page.index('id="warnings"')]
    claim = esc(challenge["verdict"]["claim"]["text"])
    assert claim in headline
    assert page.count(claim) >= 2 and esc(challenge["verdict"]["null"]["text"]) in page


def test_challenge_leads_with_status_words_and_shows_nuisance_pulls(page, folders):
    challenge = json.loads((folders["challenge"] / "challenge.json").read_text())
    for label in ("claim", "null"):
        status = challenge["verdict"][label]["status"]
        assert status in ("consistent", "not consistent", "depends on assumptions")
        k = challenge["hypotheses"][label]["k"]
        name = f"claimed k = {fmt(k, 2)}" if label == "claim" else f"no coupling, k = {fmt(k, 2)}"
        assert f"<strong>{esc(name)}: {esc(status)}.</strong>" in page
    assert "What each hypothesis needs" in page and "offsets of its mocks (pull)" in page


def test_a_test_that_cannot_fail_reads_not_applicable_with_its_reason(page, folders):
    document = json.loads((folders["nulltests"] / "nulltests.json").read_text())
    reasons = [row["skipped"] for row in document["tests"].values() if row["passed"] is None]
    assert reasons  # one sample and no selection: several tests cannot fail here
    assert "not applicable" in page
    for reason in reasons:
        assert esc(reason) in page


def test_method_references_and_provenance(page, folders):
    for reference in ("ApJ 882, 19", "ApJL 944, L31", "ApJ 665, 1489", "arXiv:1804.06788", "ARA&amp;A 52, 415"):
        assert reference in page
    summary = _summary(folders)
    assert summary["inputs"][0]["sha256"] in page
    assert summary["versions"]["numpy"] in page
    assert "report written" in page and "Caveats" in page


def test_non_convergence_and_unmodelled_selection_are_flagged(folders, tmp_path):
    summary = copy.deepcopy(_summary(folders))
    summary["convergence"]["converged"] = False
    summary["warnings"] = []
    summary["selection"] = {"corrected": False, "samples": {"S0": [{"kind": "mass_cut", "log_mbh_min": 8.4}]}}
    folder = tmp_path / "stalled"
    folder.mkdir()
    (folder / "summary.json").write_text(json.dumps(summary))
    text = build_report([folder], tmp_path / "r.html").path.read_text()
    panel = text[text.index('id="warnings"'):text.index('id="contents"')]
    assert "the chain did not converge" in panel
    assert "selection is not modelled" in panel
    assert "NOT converged" in text and "declared selection NOT modelled" in text


def test_unexpected_layouts_are_shown_without_crashing(tmp_path):
    odd = {"summary.json": {"k": {"median": "abc", "interval68": [1]}, "parameters": {"k": 5},
                            "tests": None, "data": {"S": None}, "warnings": ["odd <b>file</b>"]},
           "nulltests.json": {"tests": "nonsense"}, "challenge.json": {"verdict": {"text": 3}},
           "budget.json": {"omega_bh": None, "assumptions": "x"}, "remnants.json": {"objects": [1, None]}}
    folder = tmp_path / "odd"
    folder.mkdir()
    for name, value in odd.items():
        (folder / name).write_text(json.dumps(value))
    text = build_report([folder], tmp_path / "odd.html").path.read_text()
    for title in ("Posterior of k", "Null tests", "Does a claimed k survive", "Dark-energy budget",
                  "Stellar-remnant test"):
        assert title in text
    assert "odd &lt;b&gt;file&lt;/b&gt;" in text


def test_a_parent_folder_stands_for_its_result_subfolders(folders, tmp_path):
    root = tmp_path / "demo"
    root.mkdir()
    for kind in ("budget", "remnants"):
        shutil.copytree(folders[kind], root / kind)
    (root / "notes").mkdir()
    assert [f.kinds for f in collect_folders([root])] == [("budget",), ("remnants",)]


def test_unreadable_results_and_bad_paths_are_errors(tmp_path):
    broken = tmp_path / "broken"
    broken.mkdir()
    (broken / "budget.json").write_text("{not json")
    with pytest.raises(InputError, match="no readable results: budget.json: cannot be read as JSON"):
        collect_folders([broken])
    with pytest.raises(InputError, match="no such folder"):
        collect_folders([tmp_path / "absent"])
    (tmp_path / "file.txt").write_text("x")
    with pytest.raises(InputError, match="not a folder"):
        collect_folders([tmp_path / "file.txt"])
    (tmp_path / "empty").mkdir()
    with pytest.raises(InputError, match="holds no recognisable results"):
        collect_folders([tmp_path / "empty"])
    with pytest.raises(InputError, match="no results folders given"):
        collect_folders([])
    with pytest.raises(ConfigError, match="is a folder"):
        build_report([broken], tmp_path)
    valid = tmp_path / "valid"
    valid.mkdir()
    (valid / "budget.json").write_text('{"omega_bh": 0.1}')
    (tmp_path / "blocker").write_text("a file where a folder should be")
    with pytest.raises(ConfigError, match="blocker/r.html: cannot write the report"):
        build_report([valid], tmp_path / "blocker" / "r.html")


def test_html_helpers():
    assert str(parameter_label("sigma_int[<b>]")) == "<var>σ</var><sub>int</sub>[&lt;b&gt;]"
    assert str(parameter_label("delta[a&b]")) == "<var>δ</var>[a&amp;b]"
    assert fmt(None) == "–" and fmt(float("nan")) == "–" and fmt(-0.5, 2) == "−0.50"
    assert fmt(1.5e-5, 3) == "1.50×10⁻⁵" and fmt(True) == "yes"
    assert fmt_sig(0.004286) == "0.00429" and fmt_sig(5.446e8) == "5.45×10⁸" and fmt_sig(123.4) == "123"


# ----- LaTeX -------------------------------------------------------------------------------------
def _strip_escapes(text):
    return re.sub(r"\\[{}%&$#_]", "", text)


def test_fit_writes_summary_tex_equal_to_the_table(folders):
    tex = (folders["fit"] / "summary.tex").read_text()
    assert tex == posterior_table(_summary(folders))


def test_latex_table_is_balanced(folders):
    tex = (folders["fit"] / "summary.tex").read_text()
    environments = re.findall(r"\\(begin|end)\{(\w+)\}", tex)
    stack = []
    for kind, name in environments:
        if kind == "begin":
            stack.append(name)
        else:
            assert stack and stack.pop() == name
    assert stack == [] and [n for k, n in environments if k == "begin"] == ["table", "tabular"]
    depth = 0
    for char in _strip_escapes(tex):
        depth += {"{": 1, "}": -1}.get(char, 0)
        assert depth >= 0
    assert depth == 0
    body = [line for line in tex.splitlines() if line.endswith(r"\\")]
    for line in body:
        if not line.startswith(r"\multicolumn"):
            assert line.count("&") - line.count(r"\&") == 3, line
        assert _strip_escapes(line).count("$") % 2 == 0, line


def test_latex_numbers_equal_summary_json_at_printed_precision(folders):
    summary = _summary(folders)
    tex = (folders["fit"] / "summary.tex").read_text()
    rows = [line for line in tex.splitlines() if line.endswith(r"\\")][1:1 + len(summary["parameters"])]
    assert len(rows) == len(summary["parameters"])
    for line, (name, row) in zip(rows, summary["parameters"].items()):
        assert line.startswith(parameter_symbol(name))
        cells = line[len(parameter_symbol(name)):]
        printed = [float(v) for v in re.findall(r"-?\d+\.\d{3}", cells)]
        expected = [row["median"], *row["interval68"], *row["interval95"]]
        assert printed == [round(v, 3) + 0.0 for v in expected], name
    tests = summary["tests"]
    for label, key in ((r"$P(k \le 0 \mid \mathrm{data})$", "p_k_le_0"),
                       (r"Profile likelihood, $k = 0$ ($\sigma$)", "sigma_vs_k0")):
        line = next(line for line in tex.splitlines() if line.startswith(label))
        assert f"${tests[key]:.3f}$" in line


def test_latex_escapes_names_from_the_data():
    assert parameter_symbol("sigma_int[lo_cal&%]") == r"$\sigma_{\rm int}$[lo\_cal\&\%]"
    assert parameter_symbol("delta[virial]") == r"$\delta$[virial]"
    assert parameter_symbol("k") == "$k$" and parameter_symbol("odd_name") == r"odd\_name"
    assert escape_latex("a\\b{c}~^#$") == r"a\textbackslash{}b\{c\}\textasciitilde{}\textasciicircum{}\#\$"
    table = posterior_table({"parameters": {"k": {"median": -0.0001, "interval68": [None, 1.0]}},
                             "tests": {"bayes_factor_k0": 2.5e-7}})
    assert "$0.000$ & -- &" in table and r"$2.50\times10^{-7}$" in table


# ----- command line ------------------------------------------------------------------------------
def test_cli_report_writes_the_page_atomically(folders, tmp_path, capsys):
    out = tmp_path / "site" / "report.html"
    assert main(["report", str(folders["fit"]), str(folders["budget"]), "--out", str(out),
                 "--title", "Run <1>"]) == 0
    assert out.is_file() and "Run &lt;1&gt;" in out.read_text()
    assert f"report written to {out}" in capsys.readouterr().out
    assert sorted(p.name for p in out.parent.iterdir()) == ["report.html"]


@pytest.mark.parametrize("case, message", [("absent", "no such folder"),
                                           ("empty", "holds no recognisable results")])
def test_cli_bad_folder_exits_2_with_one_line_and_keeps_the_old_page(folders, tmp_path, capsys, case,
                                                                      message):
    (tmp_path / "empty").mkdir()
    out = tmp_path / "report.html"
    out.write_text("old page")
    code = main(["report", str(folders["budget"]), str(tmp_path / case), "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 2
    assert len(err.strip().splitlines()) == 1 and message in err and "Traceback" not in err
    assert out.read_text() == "old page"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["empty", "report.html"]


def test_campaign_bias_flag_needs_size_and_significance():
    from cosmogrow.report.calibration_section import bias_off

    # 0.25 sigma_k but only 1.5 standard errors (40 mocks): noise, not a miscalibration
    assert not bias_off({"bias_over_sigma": 0.25, "bias": 0.06, "bias_error": 0.04})
    # 0.25 sigma_k at 6 standard errors: flagged
    assert bias_off({"bias_over_sigma": 0.25, "bias": 0.06, "bias_error": 0.01})
    # significant but small: not flagged
    assert not bias_off({"bias_over_sigma": 0.1, "bias": 0.06, "bias_error": 0.01})
