"""The verdict rules (docs/method.md#verdicts): pure functions, checked on hand-made significances."""

import math

import numpy as np
import pytest
from scipy import stats

from cosmogrow.inference.verdicts import (CONSISTENT, DEPENDS, EXCLUDED, classify, flip_width,
                                          headline, judge, k_key, p_from_sigma, sigma_from_p,
                                          verdicts_from_rows)


@pytest.mark.parametrize("sigmas, word", [([5.5, 4.0, 3.0], EXCLUDED), ([2.9, 1.0, 0.2], CONSISTENT),
                                          ([5.5, 2.6, 1.9], DEPENDS), ([1.0, 2.0, 3.1], DEPENDS),
                                          ([math.inf, 4.0, 3.5], EXCLUDED), ([], DEPENDS),
                                          ([float("nan"), 4.0, 5.0], EXCLUDED)])
def test_classify_needs_all_widths_on_one_side(sigmas, word):
    assert classify(sigmas, 3.0) == word


def test_threshold_is_respected():
    assert classify([2.5, 2.2, 2.1], 2.0) == EXCLUDED
    assert classify([2.5, 2.2, 2.1], 3.0) == CONSISTENT


def test_sigma_and_p_are_two_sided_inverses():
    # 3σ two-sided is p = 0.0027 (common practice: Gaussian tail probabilities).
    assert p_from_sigma(3.0) == pytest.approx(0.0026998, rel=1e-4)
    for sigma in (0.5, 1.0, 2.0, 5.0):
        assert sigma_from_p(p_from_sigma(sigma)) == pytest.approx(sigma, rel=1e-9)
    assert sigma_from_p(0.05) == pytest.approx(stats.norm.ppf(0.975))


def test_flip_width_interpolates_in_log_width():
    # sigma = 6 - 3 log2(w/0.1): crosses 3 at w = 0.2 exactly
    widths = [0.1, 0.3, 0.9]
    sigmas = [6 - 3 * np.log2(w / 0.1) for w in widths]
    # linear in log width, so the interpolation is exact
    assert flip_width(widths, sigmas, 3.0) == pytest.approx(0.2, rel=1e-9)
    assert flip_width(widths, [4, 5, 6], 3.0) is None


def test_depends_names_the_flipping_width_and_the_unconstrained_value():
    out = judge(3, [5.5, 2.6, 1.9], base_width=0.3, sigma_unconstrained=0.4, what="the offsets")
    assert out["verdict"] == DEPENDS
    assert out["sigma"] == 2.6 and out["sigma_range"] == [1.9, 5.5]
    flip = flip_width([0.1, 0.3, 0.9], [5.5, 2.6, 1.9], 3.0)
    assert f"N(0, {flip:.2g} dex) or tighter" in out["reason"]
    assert out["reason"].count(".") >= 1 and "\n" not in out["reason"]
    assert "do not exclude" in out["data_alone"]


def test_loosening_that_raises_sigma_is_worded_looser():
    out = judge(0, [1.0, 2.0, 3.5], base_width=0.3)
    assert out["verdict"] == DEPENDS and "or looser" in out["reason"]


def test_verdicts_from_rows_uses_the_scaled_rows_and_not_the_unconstrained_one():
    rows = [{"setting": "offset_width_scale", "value": v, "sigma_by_k": {"0": s0, "3": s3}}
            for v, s0, s3 in ((1 / 3, 0.5, 6.0), (1.0, 0.4, 4.0), (3.0, 0.3, 3.2))]
    rows.append({"setting": "offsets_unconstrained", "value": None, "sigma_by_k": {"0": 0.1, "3": 0.2}})
    out = verdicts_from_rows(rows, [0, 3], base_width=0.3)
    assert [row["verdict"] for row in out] == [CONSISTENT, EXCLUDED]
    assert out[1]["sigma_unconstrained"] == 0.2 and "do not exclude" in out[1]["data_alone"]
    assert k_key(1.5) in ("1.5",)


def test_headline_never_shows_a_lone_sigma_when_the_verdict_depends():
    text = headline([judge(3, [5.5, 2.6, 1.9], base_width=0.3), judge(0, [4.0, 3.5, 3.1])])
    assert text.startswith("k = 3: depends on assumptions (1.9σ to 5.5σ")
    assert "k = 0: excluded (3.5σ)" in text
