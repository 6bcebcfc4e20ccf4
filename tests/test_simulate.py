"""The population simulator: distributions of hosts and redshifts, the forward model, selection by
random draws, reproducibility, resample-hosts mode and configuration errors."""

import numpy as np
import pytest
from astropy import units as u
from astropy.cosmology import Planck18
from scipy import special, stats

from cosmogrow.data.catalog import Catalog
from cosmogrow.errors import ConfigError
from cosmogrow.simulation.massfunction import BALDRY2012, HostMassSampler
from cosmogrow.model.likelihood import calibrated_hosts
from cosmogrow.selection.compiled import SelectionSet
from cosmogrow.simulation.population import RedshiftSampler, simulate_population
from cosmogrow.simulation.resample import resample_hosts

# Baldry et al. 2012 (MNRAS 421, 621) double Schechter, h = 0.7 [paper, abstract]:
# M* = 10^10.66 Msun, φ1 = 3.96e-3, α1 = -0.35, φ2 = 0.79e-3 Mpc^-3, α2 = -1.47.
LOG_MCHAR, PHI1, ALPHA1, PHI2, ALPHA2 = 10.66, 3.96e-3, -0.35, 0.79e-3, -1.47


def upper_gamma(a, x):
    """Γ(a, x) for a > -1 (recurrence Γ(a, x) = (Γ(a+1, x) - x^a e^-x) / a when a < 0)."""
    if a > 0:
        return special.gammaincc(a, x) * special.gamma(a)
    return (special.gammaincc(a + 1, x) * special.gamma(a + 1) - x**a * np.exp(-x)) / a


def baldry_cdf(log_mstar, log_min, log_max):
    """Analytic CDF of φ(M) dM = e^(-M/M*) [φ1 (M/M*)^α1 + φ2 (M/M*)^α2] dM/M* on [min, max]."""
    def above(log_m):
        x = 10.0 ** (np.asarray(log_m) - LOG_MCHAR)
        return PHI1 * upper_gamma(ALPHA1 + 1, x) + PHI2 * upper_gamma(ALPHA2 + 1, x)

    return (above(log_min) - above(log_mstar)) / (above(log_min) - above(log_max))


def config(**sample):
    base = {"name": "s", "n": 2000, "z_range": [0.2, 1.0], "method": "dynamical"}
    return {"seed": 1, "truth": {"k": 0.0}, "sample": [{**base, **sample}]}


def test_defaults_are_baldry_2012():
    assert (BALDRY2012.log_mchar, BALDRY2012.phi1, BALDRY2012.alpha1, BALDRY2012.phi2,
            BALDRY2012.alpha2) == (LOG_MCHAR, PHI1, ALPHA1, PHI2, ALPHA2)


def test_host_masses_follow_the_mass_function():
    catalog, _ = simulate_population(config(n=30000, log_mstar_err=1e-6, log_mstar_min=9.0,
                                            log_mstar_max=12.0))
    result = stats.kstest(catalog.log_mstar, lambda s: baldry_cdf(s, 9.0, 12.0))
    assert result.pvalue > 0.01
    # the test can fail: the same draws against a single Schechter with α = -1.47 are rejected
    wrong = stats.kstest(catalog.log_mstar, lambda s: (
        (upper_gamma(-0.47, 10 ** (9 - LOG_MCHAR)) - upper_gamma(-0.47, 10 ** (s - LOG_MCHAR)))
        / (upper_gamma(-0.47, 10 ** (9 - LOG_MCHAR)) - upper_gamma(-0.47, 10 ** (12 - LOG_MCHAR)))))
    assert wrong.pvalue < 1e-6
    sampler = HostMassSampler(BALDRY2012, 9.0, 12.0)
    grid = np.linspace(9.0, 12.0, 301)
    assert np.allclose(sampler.cdf(grid), baldry_cdf(grid, 9.0, 12.0), atol=1e-6)


def test_redshifts_follow_the_comoving_volume():
    catalog, _ = simulate_population(config(n=30000, z_range=[0.0, 2.0]))
    volume = lambda z: Planck18.comoving_volume(z).to_value(u.Mpc**3)  # noqa: E731
    result = stats.kstest(catalog.z, lambda z: volume(z) / volume(2.0))
    assert result.pvalue > 0.01
    assert stats.kstest(catalog.z, stats.uniform(0, 2).cdf).pvalue < 1e-6  # uniform in z is rejected
    sampler = RedshiftSampler(Planck18, 0.5, 1.5)
    z = np.linspace(0.5, 1.5, 51)
    expected = (volume(z) - volume(0.5)) / (volume(1.5) - volume(0.5))
    assert np.allclose(sampler.cdf(z), expected, atol=1e-6)


def test_forward_model_slope_and_scatter():
    """Without selection: m_obs - alpha - beta (s - s_pivot) - delta regresses on x with slope
    -(k - beta gamma) and scatter² = sigma_int² + f_out sigma_out² + e_m² (host errors ~0)."""
    truth = {"k": 2.0, "alpha": 8.0, "beta": 1.2, "sigma_int": 0.25, "gamma": 0.5, "z_ref": 0.1,
             "delta": {"virial": 0.3}, "f_out": 0.2, "sigma_out": 0.5}
    cfg = {"seed": 4, "truth": truth,
           "sample": [{"name": "v", "n": 40000, "z_range": [0.0, 3.0], "method": "virial",
                       "log_mstar_err": 1e-6}]}
    catalog, out = simulate_population(cfg)
    x = np.log10((1 + catalog.z) / 1.1)
    resid = catalog.log_mbh - 8.0 - 1.2 * (catalog.log_mstar - 11.0) - 0.3
    fit = stats.linregress(x, resid)
    assert fit.slope == pytest.approx(-(2.0 - 1.2 * 0.5), abs=4 * fit.stderr)
    assert fit.intercept == pytest.approx(0.0, abs=4 * fit.intercept_stderr)
    expected_var = 0.25**2 + 0.2 * 0.5**2 + 0.4**2
    assert np.var(resid - fit.slope * x) == pytest.approx(expected_var, rel=0.03)
    assert out["k"] == 2.0 and out["delta"] == {"virial": 0.3} and out["seed"] == 4
    assert np.all(catalog.log_mbh_err == 0.4) and set(catalog.method) == {"virial"}


def test_selected_fraction_matches_the_analytic_probability():
    selection = [{"kind": "flux_limit", "flux_limit": 3e-14, "bolometric_correction": 10.0},
                 {"kind": "mass_cut", "log_mbh_min": 8.3, "width": 0.1},
                 {"kind": "host_mass_cut", "log_mstar_min": 10.5}]
    cfg = config(n=20000, z_range=[0.8, 2.0], method="reverberation", selection=selection,
                 log_mstar_min=10.3)
    cfg["truth"] = {"k": 1.0, "alpha": 8.6, "sigma_int": 0.3, "delta": {"reverberation": 0.1}}
    _, truth = simulate_population(cfg)
    info = truth["samples"][0]
    # the analytic P(S | s, z) averaged over hosts drawn from the same distributions
    rng = np.random.default_rng(99)
    n_hosts = 400_000
    s_true = HostMassSampler(BALDRY2012, 10.3, 12.5).draw(n_hosts, rng)
    z = RedshiftSampler(Planck18, 0.8, 2.0).draw(n_hosts, rng)
    s_obs = s_true + 0.15 * rng.standard_normal(n_hosts)
    mu_true = 8.6 + (s_true - 11.0) - 1.0 * np.log10(1 + z)
    cuts = SelectionSet.from_arrays({"s": selection}, z=z, log_mstar=s_obs, sample="s", cosmo=Planck18)
    p_hosts = cuts.probability(mu_true, 0.1, 0.3**2, 0.2)
    expected = p_hosts.mean()
    error = np.hypot(np.sqrt(expected * (1 - expected) / info["n_candidates"]),
                     p_hosts.std() / np.sqrt(n_hosts))
    assert 0.05 < expected < 0.95, expected
    assert info["acceptance"] == pytest.approx(expected, abs=3 * error)


def test_same_seed_same_catalogue_and_seed_argument_wins():
    cfg = config(n=500, selection={"kind": "mass_cut", "log_mbh_min": 8.5})
    first, truth_a = simulate_population(cfg)
    second, _ = simulate_population(cfg)
    for name in ("ids", "z", "log_mbh", "log_mstar", "sample", "method"):
        assert np.array_equal(getattr(first, name), getattr(second, name))
    other, truth_b = simulate_population(cfg, seed=2)
    assert truth_a["seed"] == 1 and truth_b["seed"] == 2
    assert not np.array_equal(first.log_mbh, other.log_mbh)
    assert np.all(first.log_mbh >= 8.5)  # hard cut on the observed mass


def test_resample_hosts_keeps_the_design_and_applies_the_selection():
    rng = np.random.default_rng(5)
    n = 3000
    catalog = Catalog.from_columns(
        z=rng.uniform(0.5, 1.5, n), log_mbh=np.full(n, 8.0), log_mbh_err=rng.uniform(0.1, 0.4, n),
        log_mstar=rng.normal(11.0, 0.3, n), log_mstar_err=np.full(n, 0.2),
        sample=np.where(np.arange(n) < 2000, "hi", "lo"), method=np.where(np.arange(n) % 2, "virial", "rm"))
    truth = {"k": 0.0, "alpha": 8.5, "sigma_int": 0.3, "delta": {"virial": 0.2}}
    cut = {"hi": {"kind": "mass_cut", "log_mbh_min": 8.6}}
    out = resample_hosts(catalog, truth, cut, Planck18, seed=3, host_errors="first_order")
    for name in ("ids", "z", "log_mbh_err", "log_mstar", "log_mstar_err", "sample", "method"):
        assert np.array_equal(getattr(out, name), getattr(catalog, name))
    hi = out.sample == "hi"
    assert np.all(out.log_mbh[hi] >= 8.6)
    assert np.mean(out.log_mbh[~hi] < 8.6) > 0.3  # the other sample is not cut
    # unselected rows, first-order host errors: m_obs - mu ~ N(0, sigma² + e_s² + e_m²)
    lo = ~hi
    mu = 8.5 + (catalog.log_mstar[lo] - 11.0) + 0.2 * (catalog.method[lo] == "virial")
    pulls = (out.log_mbh[lo] - mu) / np.sqrt(0.09 + 0.04 + catalog.log_mbh_err[lo] ** 2)
    assert stats.kstest(pulls, "norm").pvalue > 0.01
    again = resample_hosts(catalog, truth, cut, Planck18, seed=3, host_errors="first_order")
    assert np.array_equal(again.log_mbh, out.log_mbh)
    # the default: hosts from the regression calibration the fit uses (cosmogrow.model)
    host, host_err = calibrated_hosts(catalog.subset(lo), "calibrated")
    calibrated = resample_hosts(catalog.subset(lo), truth, {}, Planck18, seed=4)
    mu = 8.5 + (host - 11.0) + 0.2 * (catalog.method[lo] == "virial")
    pulls = (calibrated.log_mbh - mu) / np.sqrt(0.09 + host_err**2 + catalog.log_mbh_err[lo] ** 2)
    assert stats.kstest(pulls, "norm").pvalue > 0.01
    fixed = resample_hosts(catalog.subset(lo), truth, {}, Planck18, seed=4, host_errors="fixed")
    mu = 8.5 + (catalog.log_mstar[lo] - 11.0) + 0.2 * (catalog.method[lo] == "virial")
    pulls = (fixed.log_mbh - mu) / np.sqrt(0.09 + catalog.log_mbh_err[lo] ** 2)
    assert stats.kstest(pulls, "norm").pvalue > 0.01


def test_resample_hosts_accepts_the_simulator_truth():
    catalog, truth = simulate_population(config(n=300))
    out = resample_hosts(catalog, truth, {}, Planck18, seed=1)
    assert len(out) == 300 and not np.array_equal(out.log_mbh, catalog.log_mbh)


def test_resample_hosts_errors():
    catalog = Catalog.from_columns(z=[0.5, 0.6], log_mbh=[8.0, 8.0], log_mbh_err=[0.1, 0.1],
                                   log_mstar=[11.0, 10.0], log_mstar_err=[0.1, 0.1], sample="s",
                                   ids=["a", "b"])
    host_cut = {"s": {"kind": "host_mass_cut", "log_mstar_min": 10.5}}
    with pytest.raises(ConfigError, match=r"1 row\(s\) fail a host_mass_cut .* id 'b', sample 's'"):
        resample_hosts(catalog, {}, host_cut, Planck18, seed=1)
    with pytest.raises(ConfigError, match=r"2 row\(s\) of sample\(s\) s were never selected"):
        # two cuts: no exact truncated draw, and rejection cannot reach 4 dex above the mean
        two_cuts = [{"kind": "mass_cut", "log_mbh_min": 12.0}, {"kind": "mass_cut", "log_mbh_min": 12.0,
                                                                 "on": "intrinsic", "width": 0.1}]
        resample_hosts(catalog, {}, {"s": two_cuts}, Planck18, seed=1)
    with pytest.raises(ConfigError, match=r"host_errors: expected one of calibrated, first_order, fixed, "
                                          r"got 'exact'"):
        resample_hosts(catalog, {}, {}, Planck18, seed=1, host_errors="exact")
    with pytest.raises(ConfigError, match=r"truth: unknown key 'kappa'"):
        resample_hosts(catalog, {"kappa": 1.0}, {}, Planck18, seed=1)


def test_absurdly_low_acceptance_names_the_sample():
    with pytest.raises(ConfigError, match=r"sample 's': selection acceptance .* loosen the selection"):
        simulate_population(config(n=10, selection={"kind": "mass_cut", "log_mbh_min": 13.0}))


def sample_error(message, **sample):
    with pytest.raises(ConfigError, match=message):
        simulate_population(config(**sample))


@pytest.mark.parametrize("change, message", [
    ({"n": 0}, r"sample 's': key 'n': expected a positive integer, got 0"),
    ({"n": 2.5}, r"key 'n': expected a positive integer"),
    ({"z_range": [1.0]}, r"sample 's': key 'z_range': expected \[lo, hi\]"),
    ({"z_range": [1.0, 0.5]}, r"key 'z_range': expected lo < hi"),
    ({"z_range": [-1.0, 0.5]}, r"key 'z_range': expected a finite number >= 0"),
    ({"method": "maser"}, r"key 'log_mbh_err' is required for method 'maser' \(defaults exist for "
                          r"dynamical, reverberation, virial\)"),
    ({"log_mbh_err": 0}, r"key 'log_mbh_err': expected a finite number > 0"),
    ({"log_mstar_err": "big"}, r"key 'log_mstar_err'"),
    ({"log_mstar_min": 12.0, "log_mstar_max": 11.0}, r"key 'log_mstar_max': expected > log_mstar_min"),
    ({"colour": "red"}, r"sample 's': unknown key\(s\) 'colour'; expected some of name, n, z_range"),
    ({"selection": {"kind": "mass_cut"}},
     r"sample 's': selection: kind 'mass_cut' needs key\(s\) 'log_mbh_min'"),
])
def test_sample_errors(change, message):
    sample_error(message, **change)


ONE = [{"name": "s", "n": 5, "z_range": [0, 1], "method": "dynamical"}]


@pytest.mark.parametrize("cfg, message", [
    ({"sample": []}, r"sample: expected at least one \[\[sample\]\] table"),
    ({"samples": [{}]}, r"unknown key\(s\) 'samples'; expected some of seed, cosmology"),
    ({"seed": -1, "sample": [{"name": "s"}]}, r"seed: expected a non-negative integer"),
    ({"sample": [{"n": 5}]}, r"sample\[0\]: key 'name': expected a non-empty string"),
    ({"sample": [{"name": "s", "n": 5, "z_range": [0, 1]}]}, r"sample 's': missing key 'method'"),
    ({"sample": ONE * 2},
     r"sample: duplicate name\(s\) 's'"),
    ({"truth": {"kappa": 1}, "sample": ONE},
     r"truth: unknown key 'kappa'; expected some of k, alpha"),
    ({"truth": {"sigma_int": -0.1}, "sample": ONE},
     r"truth.sigma_int: expected a finite number >= 0"),
    ({"truth": {"delta": 0.2}, "sample": ONE},
     r"truth.delta: expected a table method -> offset"),
    ({"truth": {"sigma_int": {"t": 0.3}}, "sample": ONE},
     r"truth.sigma_int: no value for sample 's'"),
    ({"truth": {"f_out": 1.5}, "sample": ONE},
     r"truth.f_out: expected a finite number >= 0 and <= 0.99"),
    ({"mass_function": {"phi3": 1}, "sample": ONE},
     r"mass_function: unknown key\(s\) 'phi3'"),
    ({"cosmology": "Planck99", "sample": ONE},
     r"cosmology: unknown realisation 'Planck99'"),
])
def test_config_errors(cfg, message):
    with pytest.raises(ConfigError, match=message):
        simulate_population(cfg)
