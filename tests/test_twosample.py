"""The one-sort two-sample tests against scipy.stats (independent implementations of the same
published statistics: Kolmogorov–Smirnov; Anderson–Darling k-sample with midranks, Scholz &
Stephens 1987; Epps & Singleton 1986)."""

import warnings

import numpy as np
import pytest
from scipy import stats

from cosmogrow.inference.twosample import (KS_EXACT_MAX_PRODUCT, PairComparison, ad_pvalues,
                                           es_pvalues)


def _scipy(a, b, ks_method):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # capped AD p-values
        return (stats.ks_2samp(a, b, method=ks_method), stats.anderson_ksamp([a, b], variant="midrank"),
                stats.epps_singleton_2samp(a, b))


@pytest.mark.parametrize("n_a, n_b, ties, shift", [
    (40, 60, False, 0.0), (40, 60, True, 0.3), (12, 9, False, 0.5),      # small: exact KS, ES corrected
    (700, 1100, False, 0.05), (700, 1100, True, 0.0), (3000, 2000, False, 0.2)])
def test_statistics_and_p_values_equal_scipy(n_a, n_b, ties, shift):
    rng = np.random.default_rng(n_a + n_b)
    a, b = rng.normal(0, 1, n_a), rng.standard_t(5, n_b) + shift
    if ties:  # rounded values: many ties within and across samples
        a, b = np.round(a, 1), np.round(b, 1)
    pair = PairComparison(n_a, n_b)
    d, a2, w, dof = pair.statistics(a, b)
    exact = n_a * n_b <= KS_EXACT_MAX_PRODUCT
    ks, ad, es = _scipy(a, b, "exact" if exact else "asymp")
    assert d == pytest.approx(ks.statistic, abs=1e-12)
    assert pair.ks_pvalues(np.array([d]), [(a, b)])[0] == pytest.approx(ks.pvalue, rel=1e-9, abs=1e-300)
    assert a2 == pytest.approx(ad.statistic, rel=1e-9, abs=1e-9)
    assert ad_pvalues(np.array([a2]))[0] == pytest.approx(ad.pvalue, rel=1e-9)
    assert w == pytest.approx(es.statistic, rel=1e-6, abs=1e-9)
    assert dof == 4
    assert es_pvalues(np.array([w]), np.array([dof]))[0] == pytest.approx(es.pvalue, rel=1e-5, abs=1e-12)


def test_identical_samples_give_no_difference_and_a_constant_sample_no_es():
    a = np.arange(20.0)
    d, a2, w, _ = PairComparison(20, 20).statistics(a, a.copy())
    assert d == 0.0 and w == pytest.approx(0.0, abs=1e-12)
    assert ad_pvalues(np.array([a2]))[0] == 0.25  # capped at the table's largest level
    _, _, w, dof = PairComparison(10, 10).statistics(np.ones(10), np.ones(10))
    assert np.isnan(w) and dof == 0 and np.isnan(es_pvalues(np.array([w]), np.array([dof]))[0])
