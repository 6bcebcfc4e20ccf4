"""The compiled loops of the selection correction (selection/_kernels.c) against the numpy code.

- built: `make install-test` compiles them, so the suite runs the path users run;
- log Φ from the shared table equals the numpy evaluation bit for bit inside the table, and scipy's
  `log_ndtr` (an independent implementation) to 1e-13 below it, where the asymptotic series is used;
- one cut per object ("o", "i"): the compiled terms equal the numpy ones bit for bit (the C code is
  built without fused multiply-adds and does numpy's operations in numpy's order), for every way the
  offsets and variances broadcast and for strided inputs;
- two cuts ("oo", "io", "ii"): within 1e-12 of numpy (own exp and log, another summation order);
  at correlations >= 0.925 the compiled code declines and numpy answers;
- the compiled orthant against scipy.stats.multivariate_normal.cdf (Genz's algorithm, Genz 2004,
  Statistics and Computing 14, 251) to the quadrature's stated accuracy.
"""

import os
import subprocess
import sys

import numpy as np
import pytest
from scipy import stats
from scipy.special import log_ndtr

from cosmogrow.selection import kernels, probit
from cosmogrow.selection.terms import GroupTerms

pytestmark = pytest.mark.skipif(os.environ.get("COSMOGROW_NUMPY_SELECTION") == "1",
                                reason="compiled loops switched off")

W, N = 6, 700


def _inputs(seed=0, widths=(0.2, 0.4)):
    rng = np.random.default_rng(seed)
    mu = rng.normal(8.3, 0.8, (W, N))
    var = rng.uniform(0.02, 0.25, (W, N))
    delta = rng.normal(0.0, 0.1, (W, N))
    per_object = dict(lim=(rng.normal(8.0, 0.3, N), rng.normal(8.3, 0.3, N)),
                      w2=(rng.uniform(*widths, N) ** 2, rng.uniform(*widths, N) ** 2),
                      m_obs=rng.normal(8.3, 0.6, N), e2=rng.uniform(0.02, 0.3, N) ** 2)
    return mu, var, delta, per_object


def _numpy_terms(monkeypatch, kind, p):
    """GroupTerms built and evaluated with the compiled loops switched off."""
    with monkeypatch.context() as patch:
        patch.setattr(kernels, "AVAILABLE", False)
        return GroupTerms(kind, p["lim"][:len(kind)], p["w2"][:len(kind)], p["m_obs"], p["e2"])


def _numpy_write(monkeypatch, group, mu, delta, var):
    with monkeypatch.context() as patch:
        patch.setattr(kernels, "AVAILABLE", False)
        num, norm = group(mu, delta, var)
    return np.broadcast_to(num - norm, np.broadcast_shapes(np.shape(mu), np.shape(var)))


def test_the_compiled_loops_are_built_for_the_suite():
    assert kernels.AVAILABLE, "make install-test should have compiled cosmogrow/selection/_kernels.c"


def test_numpy_only_switch():
    code = "from cosmogrow.selection import kernels; print(kernels.AVAILABLE)"
    env = {**os.environ, "COSMOGROW_NUMPY_SELECTION": "1"}
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


@pytest.mark.parametrize("vector", [True, False], ids=["AVX lookup if present", "portable lookup"])
def test_log_phi_equals_the_table_and_scipy_below_it(vector):
    chosen = kernels.vector_lookup()
    try:
        kernels.vector_lookup(vector and chosen)
        rng = np.random.default_rng(3)
        inside = np.concatenate([np.linspace(-40.0, 12.0, 20001), rng.normal(0.0, 6.0, 50001), [np.inf]])
        inside = inside[inside >= -40.0]
        assert np.array_equal(kernels.log_phi(inside), probit.log_phi(inside))
        below = -np.logspace(np.log10(40.0001), 4, 2000)
        assert np.allclose(kernels.log_phi(below), log_ndtr(below), rtol=1e-13, atol=0)
        special = kernels.log_phi(np.array([np.nan, -np.inf]))
        assert np.isnan(special[0]) and special[1] == -np.inf
        mixed = np.array([0.3, np.nan, -50.0, 2.0, 11.0, -39.99, -1e3])  # in one block of four, and a tail
        expected = np.concatenate([probit.log_phi(mixed[[0, 3, 4, 5]]), log_ndtr(mixed[[2, 6]])])
        got = kernels.log_phi(mixed)
        assert np.isnan(got[1])
        assert np.allclose(got[[0, 3, 4, 5, 2, 6]], expected, rtol=1e-13, atol=0)
    finally:
        kernels.vector_lookup(chosen)


@pytest.mark.parametrize("kind", ["o", "i"])
@pytest.mark.parametrize("shape", ["scalar", "per object", "per walker and object"])
def test_one_cut_equals_numpy_bit_for_bit(monkeypatch, kind, shape):
    mu, var, delta, p = _inputs()
    delta = {"scalar": 0.0, "per object": delta[0], "per walker and object": delta}[shape]
    compiled = GroupTerms(kind, p["lim"][:1], p["w2"][:1], p["m_obs"], p["e2"])
    assert compiled.compiled is not None
    out = compiled.write(mu, delta, var, np.empty((W, N)))
    reference = _numpy_write(monkeypatch, _numpy_terms(monkeypatch, kind, p), mu, delta, var)
    assert np.array_equal(out, reference)


@pytest.mark.parametrize("kind", ["o", "i"])
def test_strided_and_one_dimensional_inputs(monkeypatch, kind):
    mu, var, delta, p = _inputs(1)
    wide_mu, wide_var = np.repeat(mu, 2, axis=1), np.repeat(var, 2, axis=1)  # a column stride of 2
    compiled = GroupTerms(kind, p["lim"][:1], p["w2"][:1], p["m_obs"], p["e2"])
    strided = compiled.write(wide_mu[:, ::2], delta, wide_var[:, ::2], np.empty((W, N)))
    per_walker_var = compiled.write(mu, delta, var[:, :1], np.empty((W, N)))  # one variance per walker
    one_row = compiled.write(mu[2], delta[2], var[2], np.empty(N))
    numpy_terms = _numpy_terms(monkeypatch, kind, p)
    assert np.array_equal(strided, _numpy_write(monkeypatch, numpy_terms, mu, delta, var))
    assert np.array_equal(per_walker_var, _numpy_write(monkeypatch, numpy_terms, mu, delta, var[:, :1]))
    assert np.array_equal(one_row, _numpy_write(monkeypatch, numpy_terms, mu[2], delta[2], var[2]))


@pytest.mark.parametrize("kind", ["oo", "io", "ii"])
@pytest.mark.parametrize("widths", [(0.2, 0.4), (0.6, 0.9)])  # largest correlation above / below 0.8
def test_two_cuts_agree_with_numpy(monkeypatch, kind, widths):
    mu, var, delta, p = _inputs(2, widths)
    compiled = GroupTerms(kind, p["lim"], p["w2"], p["m_obs"], p["e2"])
    out = np.empty((W, N))
    source, _keep = kernels.arrays(mu, delta, var)
    assert kernels.two_cuts(kind, source, compiled.compiled, out)
    reference = _numpy_write(monkeypatch, _numpy_terms(monkeypatch, kind, p), mu, delta, var)
    assert np.all(np.isfinite(out))
    assert np.allclose(out, reference, rtol=1e-13, atol=1e-12)


def test_two_cuts_decline_at_high_correlation(monkeypatch):
    mu, var, delta, p = _inputs(4)
    p["w2"] = (np.zeros(N), np.full(N, 1e-4))  # nearly hard cuts: correlations near 1
    compiled = GroupTerms("oo", p["lim"], p["w2"], p["m_obs"], p["e2"])
    source, _keep = kernels.arrays(mu, delta, var)
    assert not kernels.two_cuts("oo", source, compiled.compiled, np.empty((W, N)))
    out = compiled.write(mu, delta, var, np.empty((W, N)))  # numpy answers instead
    assert np.array_equal(out, _numpy_write(monkeypatch, _numpy_terms(monkeypatch, "oo", p), mu, delta, var))


def test_compiled_orthant_against_scipy():
    rng = np.random.default_rng(5)
    h, k = rng.uniform(-3.0, 3.0, 60), rng.uniform(-3.0, 3.0, 60)
    rho = rng.uniform(0.0, 0.9, 60)
    ours = probit.log_upper_orthant(h, k, rho, independent=kernels.orthant_independent)
    # P(X > h, Y > k) = P(-X < -h, -Y < -k), the CDF at (-h, -k) with the same correlation
    theirs = np.array([stats.multivariate_normal(mean=[0, 0], cov=[[1, r], [r, 1]]).cdf([-a, -b])
                       for a, b, r in zip(h, k, rho)])
    assert np.allclose(ours, np.log(theirs), rtol=0, atol=2e-6)


def test_affine_source_refuses_tables_it_would_read_past():
    affine = kernels.Affine(np.zeros(5), np.zeros(5), np.zeros(5), sig2_at=np.array([0, 1, 2, 1, 0]))
    coef = np.ones((3, 4))
    affine.at(coef, np.ones((3, 3)))  # three scatter columns: fine
    with pytest.raises(ValueError, match="fewer columns"):
        affine.at(coef, np.ones((3, 2)))
    with pytest.raises(ValueError, match="one row per walker"):
        affine.at(coef, np.ones((2, 3)))
    with pytest.raises(ValueError, match="one row per walker"):
        affine.at(coef, np.ones((3, 3), dtype=np.float32))
    with pytest.raises(ValueError, match=">= 0"):
        kernels.Affine(np.zeros(2), np.zeros(2), np.zeros(2), off_at=np.array([0, -1]))
