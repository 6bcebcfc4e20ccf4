"""What the web report says beyond the numbers: which fit is the answer (whatever the order of the
command line), the true k of simulated data, the estimator behind every quoted k, the zero-point
method used, paths relative to the page, recorded versions, and the figures' labelling."""

import copy
import json
import os

import numpy as np
import pytest
from markupsafe import escape

from cosmogrow.cli.dispatch import main
from cosmogrow.report.fit_figures import parameter_axis_label
from cosmogrow.report.fit_section import crosscheck_table
from cosmogrow.report.style import integer_counts, plt

from report_fixtures import results_folders


def esc(text):
    return str(escape(text))


@pytest.fixture(scope="module")
def folders(tmp_path_factory):
    return results_folders(tmp_path_factory)


def _fit_variant(folders, root, name, corrected, declared):
    """A copy of the fixture fit whose summary says whether selection was declared and modelled."""
    summary = json.loads((folders["fit"] / "summary.json").read_text())
    summary = copy.deepcopy(summary)
    models = [{"kind": "mass_cut", "log_mbh_min": 7.0}] if declared else []
    summary["selection"] = {"corrected": corrected, "samples": {s: models for s in summary["data"]}}
    summary["k"]["median"] = {"aware": 1.11, "plain": 0.55, "undeclared": 0.77}[name]
    folder = root / name
    folder.mkdir()
    (folder / "summary.json").write_text(json.dumps(summary))
    return folder


def _headline(page):
    return page[page.index('id="headline"'):page.index('id="warnings"')]


@pytest.mark.parametrize("order", [("plain", "aware"), ("aware", "plain")])
def test_the_selection_aware_fit_is_named_the_answer_whatever_the_order(folders, tmp_path, order):
    made = {"aware": _fit_variant(folders, tmp_path, "aware", True, True),
            "plain": _fit_variant(folders, tmp_path, "plain", False, True)}
    out = tmp_path / "r.html"
    main(["report", *(str(made[name]) for name in order), "--out", str(out)])
    headline = _headline(out.read_text())
    assert esc("The answer is the selection-aware fit ‘aware’, k = 1.11 (posterior median") in headline
    cards = headline.split("<article")[1:]
    assert esc("the answer · selection-aware fit") in cards[0] and "card-answer" in cards[0]
    assert esc("for comparison · plain fit (declared selection ignored)") in cards[1]
    rows = headline.split("<tbody>")[1].split("<tr>")[1:]
    assert ">aware<" in rows[0] and "the answer" in rows[0] and ">plain<" in rows[1]
    page = out.read_text()
    sections = [page.index(f'<p class="kicker">fit · {name}</p>') for name in ("aware", "plain")]
    assert sections[0] < sections[1]  # the answer's section comes first too


def test_a_plain_fit_without_declared_selection_beats_one_that_ignores_it(folders, tmp_path):
    ignored = _fit_variant(folders, tmp_path, "plain", False, True)
    undeclared = _fit_variant(folders, tmp_path, "undeclared", False, False)
    out = tmp_path / "r.html"
    main(["report", str(ignored), str(undeclared), "--out", str(out)])
    assert esc("The answer is the plain fit ‘undeclared’, k = 0.77") in _headline(out.read_text())


def test_no_answer_when_every_fit_ignores_its_declared_selection(folders, tmp_path):
    ignored = _fit_variant(folders, tmp_path, "plain", False, True)
    out = tmp_path / "r.html"
    main(["report", str(ignored), "--out", str(out)])
    headline = _headline(out.read_text())
    assert "No fit on this page models its declared selection" in headline
    assert "the answer ·" not in headline


def test_truth_is_shown_when_given(folders, tmp_path):
    truth = tmp_path / "truth.json"
    truth.write_text(json.dumps({"k": 1.0, "alpha": 8.7}))
    out = tmp_path / "r.html"
    assert main(["report", str(folders["fit"]), "--out", str(out), "--truth", str(truth)]) == 0
    headline = _headline(out.read_text())
    assert "their true k is <strong>1.00</strong> (from truth.json)" in headline
    assert "true k (simulation)" in headline
    plain = tmp_path / "plain.html"
    main(["report", str(folders["fit"]), "--out", str(plain)])
    assert "true k" not in plain.read_text()


@pytest.mark.parametrize("content, words", [('{"k": "one"}', "column 'k', value 'one'"),
                                            ('{"k": NaN}', "column 'k', value nan"),
                                            ("[1.0]", "expected a JSON object"),
                                            ("{broken", "cannot be read as JSON")])
def test_bad_truth_file_is_refused_in_one_line(folders, tmp_path, capsys, content, words):
    truth = tmp_path / "truth.json"
    truth.write_text(content)
    out = tmp_path / "r.html"
    assert main(["report", str(folders["fit"]), "--out", str(out), "--truth", str(truth)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and str(truth) in err and words in err
    assert not out.exists()


@pytest.fixture(scope="module")
def page(folders, tmp_path_factory):
    out = tmp_path_factory.mktemp("items") / "site" / "report.html"
    assert main(["report", *(str(f) for f in folders.values()), "--out", str(out)]) == 0
    return out, out.read_text()


def test_every_quoted_data_k_names_its_estimator(page, folders):
    text = page[1]
    fit = text[text.index('class="block result kind-fit"'):]
    assert "posterior median and central 68 % / 95 % intervals of the MCMC draws" in fit
    for kind in ("nulltests", "challenge"):
        mode = json.loads((folders[kind] / f"{kind}.json").read_text())["mode"]
        assert mode == "fast"
        section = text[text.index(f'class="block result kind-{kind}"'):]
        assert "fast estimate: maximum a posteriori k ± Laplace σ" in section.split("</section>")[0]


def test_zero_point_method_is_the_one_used(page):
    # the fixture fit ran from a catalogue without configuration: no zero point was configured
    assert "zero-point mass method</dt><dd>dynamical (chosen by cosmogrow" in page[1]


def test_provenance_paths_are_relative_to_the_page_and_versions_recorded(page, folders):
    out, text = page
    summary = json.loads((folders["fit"] / "summary.json").read_text())
    absolute = summary["inputs"][0]["path"]
    assert os.path.isabs(absolute)
    relative = os.path.relpath(absolute, out.parent)
    assert f'<th class="text mono" scope="row">{esc(relative)}</th>' in text
    assert f'<span class="mono">{esc(os.path.relpath(folders["fit"], out.parent))}</span>' in text
    rows = text[text.index("Seeds and versions"):].split("</table>")[0].split("<tr>")
    for kind in ("null tests", "challenge"):
        row = next(r for r in rows if f"<td>{kind}</td>" in r)
        assert "numpy" in row and "not recorded" not in row


def test_anderson_darling_caps_are_noted():
    summary = {"crosscheck": {"reference": "local", "tests": {
        "ks": {"best_k": 1.0, "range": [0.5, 1.5], "p_best": 0.4},
        "anderson_darling": {"best_k": 1.0, "range": [0.5, 1.5], "p_best": 0.25}}}}
    table = crosscheck_table(summary)
    assert "capped to [0.001, 0.25]" in table.caption
    assert [row[4].content for row in table.rows] == ["0.400", "≥ 0.250"]
    no_ad = crosscheck_table({"crosscheck": {"tests": {"ks": {"best_k": 1.0, "p_best": 0.3}}}})
    assert "capped" not in no_ad.caption


def test_corner_axes_carry_symbols_and_units():
    assert parameter_axis_label("k") == "$k$"
    assert parameter_axis_label("alpha") == r"$\alpha$ (log$_{10}$ M$_\odot$)"
    assert parameter_axis_label("sigma_int[deep]") == r"$\sigma_\mathrm{int}$[deep] (dex)"
    assert parameter_axis_label("delta[vir$al]") == r"$\delta$[vir\$al] (dex)"
    assert parameter_axis_label("delta_host[spiral]") == r"$\delta_\mathrm{host}$[spiral] (dex)"


def test_count_axes_have_whole_number_ticks():
    fig, ax = plt.subplots()
    ax.hist(np.arange(3.0), bins=3)  # counts of 1: matplotlib's default ticks are 0, 0.2, … 1
    integer_counts(ax)
    fig.canvas.draw()
    ticks = [t for t in ax.get_yticks() if 0 <= t <= 1]
    assert ticks and all(float(t).is_integer() for t in ticks)
    plt.close(fig)
