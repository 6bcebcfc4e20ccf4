"""The fast paths of the selection-aware likelihood agree with the direct evaluation.

- `SelectionSet.bind` (parameter-free terms precomputed, correction on the corrected rows only)
  gives exactly `log_correction` on those rows, for every cut structure and with per-walker offsets;
- the model's selection-aware likelihood equals the object-by-object one plus the correction;
- the compiled loops computing the latent mass themselves (`from_coefficients`) give exactly the
  correction of the model's own latent arrays, for every cut structure, form, scatter mode and
  with method and host-type offsets, also after pickling (a spawned worker's copy);
- the blocked, node-major bivariate orthant quadrature agrees with an independent reference,
  scipy.stats.multivariate_normal.cdf (Genz's algorithm for the bivariate normal: Genz 2004,
  Statistics and Computing 14, 251), and with the positive-correlation bounds of Slepian.
"""

import pickle

import numpy as np
import pytest
from astropy.cosmology import Planck18
from scipy import stats
from scipy.special import log_ndtr

from cosmogrow.config import ModelOptions
from cosmogrow.data.catalog import Catalog
from cosmogrow.model.likelihood import CoupledGrowthModel, build_design
from cosmogrow.selection import kernels
from cosmogrow.selection.compiled import SelectionSet
from cosmogrow.selection.probit import log_upper_orthant

FLUX = {"kind": "flux_limit", "flux_limit": 1e-13, "bolometric_correction": 10.0}
SPECS = {
    "o": {"kind": "mass_cut", "log_mbh_min": 8.4},
    "i": FLUX,
    "io": [FLUX, {"kind": "mass_cut", "log_mbh_min": 8.6, "width": 0.1}],
    "ii": [FLUX, {"kind": "mass_cut", "log_mbh_min": 8.5, "on": "intrinsic", "width": 0.1}],
    "oo": [{"kind": "mass_cut", "log_mbh_min": 8.3}, {"kind": "mass_cut", "log_mbh_min": 8.8, "width": 0.3}],
}


def _catalog(n=60, seed=0):
    rng = np.random.default_rng(seed)
    sample = np.array(["near", "far", "mid"])[rng.integers(0, 3, n)]
    z = np.where(sample == "near", 0.02, np.where(sample == "far", 1.5, 0.8))
    s = rng.normal(11.0, 0.3, n)
    err = rng.uniform(0.05, 0.3, n)
    m = 8.5 + (s - 11.0) + rng.normal(0, 0.35, n)
    return Catalog.from_columns(z=z, log_mbh=m, log_mbh_err=err, log_mstar=s,
                                log_mstar_err=np.full(n, 0.1), sample=sample,
                                method=np.where(rng.random(n) < 0.5, "dynamical", "virial"))


@pytest.mark.parametrize("far, mid, n, walkers", [("o", "i", 60, 7), ("io", "o", 60, 7), ("ii", "oo", 60, 7),
                                                  ("i", "i", 60, 7), ("io", "i", 9000, 40)])
def test_bound_correction_equals_direct(far, mid, n, walkers):
    """(The last case is large enough to be evaluated in blocks of columns.)"""
    catalog = _catalog(n)
    selection = SelectionSet.compile({"far": SPECS[far], "mid": SPECS[mid],
                                      "near": {"kind": "sphere_of_influence"}}, catalog, Planck18)
    bound = selection.bind(catalog.log_mbh, catalog.log_mbh_err)
    rng = np.random.default_rng(1)
    mu = rng.normal(8.5, 0.4, (walkers, n))
    var = rng.uniform(0.05, 0.2, (walkers, n))
    for delta in (0.0, rng.normal(0.0, 0.1, (walkers, n))):
        direct = selection.log_correction(mu, delta, var, catalog.log_mbh, catalog.log_mbh_err)
        rows = bound.rows
        fast = bound(mu[:, rows], delta if np.ndim(delta) == 0 else delta[:, rows], var[:, rows])
        assert np.array_equal(fast, direct[:, rows])
        untouched = np.setdiff1d(np.arange(len(catalog)), rows)
        assert np.all(direct[:, untouched] == 0.0)
    assert sorted(rows.tolist()) == list(range(len(catalog)))


@pytest.mark.parametrize("form", ["ratio", "relation"])
def test_model_selection_likelihood_equals_per_object_sum(form):
    catalog = _catalog(n=80, seed=4)
    options = ModelOptions(form=form)
    selection = SelectionSet.compile({"far": SPECS["io"], "near": {"kind": "sphere_of_influence"}},
                                     catalog, Planck18)
    model = CoupledGrowthModel(build_design(catalog, options), options, selection=selection)
    theta = model.initial_guess() + 1e-2 * np.random.default_rng(2).standard_normal((5, model.ndim))
    fast = model.log_likelihood(theta)
    per_object = model._log_likelihood_chunk(theta)  # Gaussian object by object + correction
    assert np.allclose(fast, per_object, rtol=0, atol=1e-9)
    d = model.design
    mu, delta, var_lat, var = model._latent(theta)
    gaussian = -0.5 * ((d.m_obs - mu - delta) ** 2 / var + np.log(var) + np.log(2 * np.pi))
    correction = selection.log_correction(mu, delta, var_lat, d.m_obs, d.m_err)
    assert np.allclose(fast, (gaussian + correction).sum(axis=1), rtol=0, atol=1e-9)


@pytest.mark.skipif(not kernels.AVAILABLE, reason="the compiled loops are not built")
@pytest.mark.parametrize("far, mid", [("o", "i"), ("io", "ii"), ("oo", "i")])
@pytest.mark.parametrize("form, scatter, hosts", [("ratio", "shared", False), ("relation", "per_sample", True)])
def test_affine_loops_equal_latent_arrays(far, mid, form, scatter, hosts):
    catalog = _catalog(n=700, seed=8)  # several blocks of the loops per group
    if hosts:
        rng = np.random.default_rng(9)
        catalog = Catalog.from_columns(z=catalog.z, log_mbh=catalog.log_mbh, log_mbh_err=catalog.log_mbh_err,
                                       log_mstar=catalog.log_mstar, log_mstar_err=catalog.log_mstar_err,
                                       sample=catalog.sample, method=catalog.method,
                                       host_type=np.where(rng.random(700) < 0.5, "quiescent", "active"))
    options = ModelOptions(form=form, scatter=scatter)
    selection = SelectionSet.compile({"far": SPECS[far], "mid": SPECS[mid],
                                      "near": {"kind": "sphere_of_influence"}}, catalog, Planck18)
    model = CoupledGrowthModel(build_design(catalog, options), options, selection=selection)
    assert model._method_offsets and model._host_offsets == hosts
    theta = model.initial_guess() + 3e-2 * np.random.default_rng(2).standard_normal((9, model.ndim))
    bound = model._correction
    arrays = model._latent(theta, model._corrected_rows, total=False)[:3]
    fused = bound.from_coefficients(*model._coefficients(theta), fallback=lambda: arrays)
    assert fused is not None and np.array_equal(fused, bound(*arrays))
    copy = pickle.loads(pickle.dumps(model))
    for (_, terms, _), affine in zip(copy._correction._parts, copy._correction._affine):
        # the addresses handed to the loops are the copy's own arrays, not the original's
        assert terms.compiled.addresses == tuple(a.ctypes.data for a in terms.compiled.arrays)
        assert affine.source.s == affine._features[0][0].ctypes.data
    assert np.array_equal(copy.log_likelihood(theta), model.log_likelihood(theta))


def test_orthant_against_scipy_multivariate_normal():
    """log P(X > h, Y > k) against scipy's bivariate normal CDF (P(X > h, Y > k) = Φ2(-h, -k; rho))
    on a grid, where its absolute accuracy (~1e-16) makes it a relative reference (P > 1e-8):
    |error| < 1e-6 in the log (measured: 2e-9); the tails at rho = 0 against the exact product
    Φ(-h)Φ(-k); and within Slepian's bounds Φ(-h)Φ(-k) <= P <= min(Φ(-h), Φ(-k)) everywhere, including the
    blocked path (more elements than one block) and the high-correlation branch."""
    grid = np.linspace(-5.0, 5.0, 11)
    h, k = (a.ravel() for a in np.meshgrid(grid, grid))
    worst = 0.0
    for rho in (0.0, 0.3, 0.6, 0.79, 0.9, 0.95, 0.99):
        ours = log_upper_orthant(h, k, rho)
        cov = [[1.0, rho], [rho, 1.0]]
        reference = stats.multivariate_normal(mean=[0.0, 0.0], cov=cov, abseps=1e-14,
                                              releps=1e-12).cdf(np.column_stack([-h, -k]))
        ok = reference > 1e-8
        worst = max(worst, np.max(np.abs(ours[ok] - np.log(reference[ok]))))
    assert worst < 1e-6
    th, tk = (a.ravel() for a in np.meshgrid(np.linspace(-9.0, 9.0, 37), np.linspace(-9.0, 9.0, 37)))
    assert np.allclose(log_upper_orthant(th, tk, 0.0), log_ndtr(-th) + log_ndtr(-tk), rtol=0, atol=1e-9)
    rng = np.random.default_rng(5)
    n = 20_000  # > one block of the quadrature
    h, k, rho = rng.normal(0, 4, n), rng.normal(0, 4, n), rng.uniform(0, 1, n)
    out = log_upper_orthant(h, k, rho)
    lower, upper = log_ndtr(-h) + log_ndtr(-k), np.minimum(log_ndtr(-h), log_ndtr(-k))
    assert np.all(np.isfinite(out))
    assert np.all(out >= lower - 1e-9) and np.all(out <= upper + 1e-9)
    pieces = np.concatenate([log_upper_orthant(h[i:i + 999], k[i:i + 999], rho[i:i + 999])
                             for i in range(0, n, 999)])
    assert np.allclose(out, pieces, rtol=0, atol=1e-12)


@pytest.mark.parametrize("scatter, selected", [("shared", True), ("per_sample", True), ("shared", False)])
def test_stacked_calls_equal_separate_calls_bit_for_bit(scatter, selected):
    """log_prob(stacked, batches) and laplace.value_and_gradient reproduce separate calls exactly
    (the MAP search relies on it to keep its path), also with a point outside the prior."""
    from cosmogrow.inference.laplace import gradient, value_and_gradient
    catalog = _catalog(n=90, seed=6)
    options = ModelOptions(form="relation", scatter=scatter)
    selection = (SelectionSet.compile({"far": SPECS["o"], "near": {"kind": "sphere_of_influence"}},
                                      catalog, Planck18) if selected else None)
    model = CoupledGrowthModel(build_design(catalog, options), options, selection=selection)
    rng = np.random.default_rng(3)
    one = model.initial_guess()[None, :]
    many = one + 1e-2 * rng.standard_normal((6, model.ndim))
    many[2, model.index_k] = 99.0  # outside the prior
    stacked = model.log_prob(np.vstack([one, many]), batches=(1, 6))
    assert np.array_equal(stacked, np.concatenate([model.log_prob(one), model.log_prob(many)]))
    value, slope = value_and_gradient(model, one[0])
    assert value == model.log_prob(one)[0] and np.array_equal(slope, gradient(model, one[0]))
