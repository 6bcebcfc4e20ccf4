"""The report leads a fit with its verdict words and shows the sensitivity table first
(docs/method.md#verdicts); a σ whose verdict depends on assumptions never stands alone."""

import json
import re

from cosmogrow.cli.dispatch import main
from cosmogrow.inference.verdicts import headline, judge
from cosmogrow.report import fit_section
from cosmogrow.report.verdict_section import assumptions_table, information_table, sigma_text

VERDICTS = [judge(0, [4.1, 0.9, 0.7], base_width=0.3, sigma_unconstrained=1.3),
            judge(3, [14.5, 5.1, 1.4], base_width=0.3, sigma_unconstrained=0.3)]
ROWS = [{"setting": "offset_width_scale", "value": v, "label": f"offsets constrained by N(0, {w} dex)",
         "k_median": m, "k_interval68": [m - 0.5, m + 0.5], "sigma_vs_k0": s0, "sigma_vs_k3": s3,
         "bayes_factor_k0": 0.5, "k_prior_width": 20.0, "method": "Laplace + importance reweighting"}
        for v, w, m, s0, s3 in ((1 / 3, 0.1, -1.1, 4.1, 14.5), (1, 0.3, -0.7, 0.9, 5.1), (3, 0.9, 1.0, 0.7, 1.4))]
SUMMARY = {"headline": headline(VERDICTS), "verdicts": VERDICTS, "sensitivity": ROWS,
           "k": {"median": -0.7, "interval68": [-1.2, -0.2], "interval95": [-1.7, 0.3]},
           "tests": {"p_k_le_0": 0.9, "sigma_vs_k0": 0.9, "sigma_vs_k3": 5.1,
                     "significance_method": "profile likelihood, offsets constrained by N(0, 0.3 dex)",
                     "sigma_vs_k0_unconstrained": 1.3, "sigma_vs_k3_unconstrained": 0.3,
                     "significance_method_unconstrained": "profile likelihood, offsets unconstrained (the data alone)",
                     "bayes_factor_k0": 0.5, "bayes_factor_prior_width": 20.0},
           "information": {"per_sample": {"near": {"n": 80, "loss_if_removed": 0.97, "alone": 0.01,
                                                   "fkk_share": 0.1}},
                           "text": "The constraint on k rests on sample 'near' compared with the others."},
           "convergence": {"converged": True}, "selection": {"corrected": False, "samples": {}}}


def test_card_and_significances_lead_with_verdict_words():
    card = fit_section.fit_card("fit", SUMMARY, "r1")
    assert card["verdict"].startswith("Verdicts: k = 0: depends on assumptions (0.7σ to 4.1σ")
    k3 = sigma_text(SUMMARY, 3)
    assert k3.startswith("5.10 σ (profile likelihood, offsets constrained by N(0, 0.3 dex))")
    assert "[1.4, 14.5] σ as the offset constraint varies: depends on assumptions" in k3
    labels = [row[0].content for row in fit_section.tests_table(SUMMARY).rows]
    assert "k = 3, the data alone" in labels
    assert len(assumptions_table(SUMMARY).rows) == 3 and len(information_table(SUMMARY).rows) == 1


def test_page_shows_verdicts_and_sensitivity_first_in_the_fit_section(tmp_path):
    folder = tmp_path / "fit"
    folder.mkdir()
    (folder / "summary.json").write_text(json.dumps(SUMMARY))
    out = tmp_path / "report.html"
    assert main(["report", str(folder), "--out", str(out)]) in (0, 3)
    page = out.read_text()
    text = re.sub(r"<[^>]+>", " ", page)
    card = text.index("Verdicts: k = 0: depends on assumptions")
    assert card < text.index("posterior median and 68 % interval")
    section = text.index("Verdicts on reference values of k")
    assert section < text.index("Sensitivity to assumptions") < text.index("Hypothesis tests on k")
    assert "only if the offsets are constrained to N(0," in text


def test_latex_table_states_the_constraint_and_the_verdicts():
    from cosmogrow.report.latex import posterior_table
    tex = posterior_table({**SUMMARY, "parameters": {"k": {"median": -0.7, "interval68": [-1.2, -0.2],
                                                             "interval95": [-1.7, 0.3]}}})
    assert r"$\sigma$: profile likelihood, offsets constrained by N(0, 0.3 dex)" in tex
    assert r"Verdicts: k = 0: depends on assumptions (0.7$\sigma$ to 4.1$\sigma$" in tex
    assert r"Profile likelihood, $k = 3$, data alone ($\sigma$) & $0.300$" in tex
    assert "σ" not in tex


def test_malformed_verdict_blocks_are_skipped_not_fatal():
    from cosmogrow.report.verdict_section import verdict_items
    for bad in (7, "text", {"k_ref": 3}, [1, None]):
        broken = {**SUMMARY, "verdicts": bad, "sensitivity": bad, "information": bad, "headline": bad}
        assert verdict_items(broken) == []
        assert sigma_text(broken, 3).startswith("5.10 σ")
        assert assumptions_table(broken) is None and information_table(broken) is None
