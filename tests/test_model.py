"""The likelihood against an independent computation, and its fast path against the element-wise one."""

import numpy as np
import pytest
from scipy import stats

from cosmogrow.config import ModelOptions
from cosmogrow.model.likelihood import CoupledGrowthModel, build_design, calibrated_hosts, lever_arm

from mocks import mock_catalog


def make_model(form="ratio", scatter="shared", outliers=False, gamma=0.0, seed=3):
    rng = np.random.default_rng(seed)
    cat = mock_catalog(rng, 2.0, samples=((0.02, 40, "dynamical"), (0.8, 30, "virial"), (1.5, 25, "virial")))
    opts = ModelOptions(form=form, scatter=scatter, outliers=outliers, host_growth=gamma,
                        host_errors="first_order")
    return cat, CoupledGrowthModel(build_design(cat, opts), opts)


def independent_log_like(cat, theta, names, gamma=0.0):
    """Sum of scipy.stats.norm.logpdf over objects, written from docs/method.md#model directly."""
    p = dict(zip(names, theta))
    beta = p.get("beta", 1.0)
    x = np.log10(1 + cat.z)
    delta = np.where(cat.method == "virial", p.get("delta[virial]", 0.0), 0.0)
    sig = np.where(cat.sample == "S0", p.get("sigma_int[S0]", p.get("sigma_int")),
                   p.get("sigma_int[S1]", p.get("sigma_int")))
    if "sigma_int[S2]" in p:
        sig = np.where(cat.sample == "S2", p["sigma_int[S2]"], sig)
    mu = p["alpha"] + beta * (cat.log_mstar - 11) - (p["k"] - beta * gamma) * x + delta
    var = sig**2 + cat.log_mbh_err**2 + beta**2 * cat.log_mstar_err**2
    return stats.norm.logpdf(cat.log_mbh, mu, np.sqrt(var)).sum()


@pytest.mark.parametrize("form", ["ratio", "relation"])
@pytest.mark.parametrize("scatter", ["shared", "per_sample"])
def test_likelihood_matches_independent_sum(form, scatter):
    cat, model = make_model(form, scatter, gamma=0.2)
    rng = np.random.default_rng(0)
    theta = model.initial_guess() + rng.normal(0, 0.05, (8, model.ndim))
    fast = model.log_likelihood(theta)
    elementwise = np.array([model.per_object_log_likelihood(t).sum() for t in theta])
    independent = np.array([independent_log_like(cat, t, model.names, gamma=0.2) for t in theta])
    np.testing.assert_allclose(fast, independent, rtol=1e-10)
    np.testing.assert_allclose(elementwise, independent, rtol=1e-10)


def test_parameter_names_follow_options():
    _, model = make_model("relation", "per_sample", outliers=True)
    assert model.names == ("k", "alpha", "beta", "sigma_int[S0]", "sigma_int[S1]", "sigma_int[S2]",
                           "delta[virial]", "f_out", "sigma_out")


def test_outlier_mixture_is_two_gaussians():
    cat, model = make_model(outliers=True)
    theta = model.initial_guess()
    theta[-2:] = (0.1, 1.5)
    p = dict(zip(model.names, theta))
    x = lever_arm(cat.z)
    delta = np.where(cat.method == "virial", p["delta[virial]"], 0.0)
    mu = p["alpha"] + (cat.log_mstar - 11) - p["k"] * x + delta
    var = p["sigma_int"] ** 2 + cat.log_mbh_err**2 + cat.log_mstar_err**2
    expected = np.log(0.9 * stats.norm.pdf(cat.log_mbh, mu, np.sqrt(var))
                      + 0.1 * stats.norm.pdf(cat.log_mbh, mu, np.sqrt(var + 1.5**2))).sum()
    assert model.log_likelihood(theta)[0] == pytest.approx(expected, rel=1e-10)


def test_prior_is_minus_infinity_outside_ranges():
    _, model = make_model()
    theta = np.tile(model.initial_guess(), (3, 1))
    theta[1, 0] = 10.5          # k beyond the default [-10, 10]
    theta[2, 2] = -0.1          # negative scatter
    lp = model.log_prob(theta)
    assert np.isfinite(lp[0]) and lp[1] == -np.inf and lp[2] == -np.inf


def test_offset_prior_is_gaussian():
    _, model = make_model()
    theta = model.initial_guess()
    i = model.names.index("delta[virial]")
    a, b = theta.copy(), theta.copy()
    a[i], b[i] = 0.0, 0.3
    # default width 0.3 dex: one standard deviation costs 1/2 in log prior
    assert model.log_prior(a)[0] - model.log_prior(b)[0] == pytest.approx(0.5)


def test_calibrated_hosts_shrink_towards_sample_mean():
    rng = np.random.default_rng(4)
    cat = mock_catalog(rng, 0.0, samples=((0.02, 400, "dynamical"), (1.0, 400, "dynamical")), s_err=0.2)
    host, host_err = calibrated_hosts(cat)
    rows = cat.sample == "S0"
    s_obs, e2 = cat.log_mstar[rows], cat.log_mstar_err[rows] ** 2
    tau2 = np.var(s_obs, ddof=1) - np.mean(e2)
    # Gaussian prior x Gaussian measurement (regression calibration, Carroll et al. 2006 ch. 4)
    expected = (tau2 * s_obs + e2 * s_obs.mean()) / (tau2 + e2)
    np.testing.assert_allclose(host[rows], expected)
    np.testing.assert_allclose(host_err[rows] ** 2, tau2 * e2 / (tau2 + e2))
    # the mock's true host spread is 0.3 dex: the deconvolved variance recovers it
    assert np.sqrt(tau2) == pytest.approx(0.3, abs=0.03)
    first, first_err = calibrated_hosts(cat, "first_order")
    np.testing.assert_array_equal(first, cat.log_mstar)
    np.testing.assert_array_equal(first_err, cat.log_mstar_err)


def test_calibration_removes_host_error_bias_between_samples():
    """Samples with different host ranges: first-order host errors bias k, calibration does not.

    The local sample's hosts sit 0.4 dex lower than the distant sample's; with beta = 1 in the
    ratio form the attenuation of the observed slope differs, which first order cannot absorb.
    """
    from cosmogrow.data.catalog import Catalog
    from cosmogrow.inference.laplace import laplace

    estimates = {"calibrated": [], "first_order": []}
    for r in range(60):
        rng = np.random.default_rng([9, r])
        parts = []
        for name, z, centre in (("near", 0.02, 10.7), ("far", 1.0, 11.1)):
            s = rng.normal(centre, 0.25, 150)
            m = 8.5 + 0.6 * (s - 11) + rng.normal(0, 0.25, 150)
            parts.append(Catalog.from_columns(z=np.full(150, z), log_mbh=m + rng.normal(0, 0.1, 150),
                                              log_mbh_err=np.full(150, 0.1), log_mstar=s + rng.normal(0, 0.2, 150),
                                              log_mstar_err=np.full(150, 0.2), sample=name))
        cat = Catalog.concat(parts)
        for mode in estimates:
            opts = ModelOptions(form="relation", host_errors=mode)
            estimates[mode].append(laplace(CoupledGrowthModel(build_design(cat, opts), opts)).theta[0])
    calibrated, first = np.array(estimates["calibrated"]), np.array(estimates["first_order"])
    # truth k = 0; tolerance 3 standard errors of the mean over 60 realisations
    assert abs(calibrated.mean()) < 3 * calibrated.std(ddof=1) / np.sqrt(60)
    assert abs(first.mean()) > 5 * first.std(ddof=1) / np.sqrt(60)


@pytest.mark.parametrize("form", ["ratio", "relation"])
def test_selection_path_equals_elementwise(form):
    from cosmogrow.background import get_cosmology
    from cosmogrow.selection.compiled import SelectionSet

    cat, _ = make_model(form)
    opts = ModelOptions(form=form, scatter="per_sample", host_errors="first_order")
    cuts = {"S1": [{"kind": "mass_cut", "log_mbh_min": 7.5, "width": 0.2}],
            "S2": [{"kind": "flux_limit", "flux_limit": 1e-14}]}
    selection = SelectionSet.compile(cuts, cat, get_cosmology())
    model = CoupledGrowthModel(build_design(cat, opts), opts, selection=selection)
    theta = model.initial_guess() + np.random.default_rng(1).normal(0, 0.05, (6, model.ndim))
    elementwise = np.array([model.per_object_log_likelihood(t).sum() for t in theta])
    np.testing.assert_allclose(model.log_likelihood(theta), elementwise, rtol=1e-10)
