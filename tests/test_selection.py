"""Selection models and the compiled selection set: thresholds, probabilities, the likelihood's
correction, and every configuration error.

Every analytic probability is checked against Monte Carlo integration with 10^6 draws per object
(tolerance 4 binomial standard errors); the selected density p(m_obs | S) the likelihood uses is
checked against Monte Carlo in bins and for its normalisation.
"""

import zlib

import numpy as np
import pytest
from astropy import units as u
from astropy.cosmology import Planck18
from scipy import integrate, stats
from scipy.special import log_ndtr

from cosmogrow.errors import ConfigError
from cosmogrow.selection.probit import log_phi, log_upper_orthant
from cosmogrow.selection.compiled import SelectionSet, build_selection
from cosmogrow.selection.physics import G_PC_KMS2_PER_MSUN, L_EDD_PER_MSUN, _distance

N_MC = 1_000_000
# Three objects: latent mean, method offset, latent variance, mass error, redshift
MU = np.array([8.2, 8.6, 9.0])
DELTA = np.array([0.0, 0.2, -0.1])
VAR = np.array([0.09, 0.12, 0.05])
ERR = np.array([0.1, 0.3, 0.2])
Z_LOCAL = np.array([0.005, 0.01, 0.02])
Z_HIGH = np.array([0.3, 0.8, 1.5])
Z_FLUX = np.array([1.0, 1.5, 2.5])

CASES = {
    "observed hard": ({"kind": "mass_cut", "log_mbh_min": 8.4}, Z_HIGH),
    "observed soft": ({"kind": "mass_cut", "log_mbh_min": 8.7, "width": 0.15}, Z_HIGH),
    "intrinsic soft": ({"kind": "mass_cut", "log_mbh_min": 8.5, "on": "intrinsic", "width": 0.2}, Z_HIGH),
    "intrinsic hard": ({"kind": "mass_cut", "log_mbh_min": 8.5, "on": "intrinsic"}, Z_HIGH),
    "flux": ({"kind": "flux_limit", "flux_limit": 1e-13, "bolometric_correction": 10.0}, Z_FLUX),
    "sphere of influence": ({"kind": "sphere_of_influence"}, Z_LOCAL),
    "flux x observed soft": ([{"kind": "flux_limit", "flux_limit": 1e-13, "bolometric_correction": 10.0},
                              {"kind": "mass_cut", "log_mbh_min": 8.6, "width": 0.1}], Z_FLUX),
    "soi x intrinsic soft": ([{"kind": "sphere_of_influence"},
                              {"kind": "mass_cut", "log_mbh_min": 8.5, "on": "intrinsic", "width": 0.1}],
                             Z_LOCAL),
    "observed hard x observed soft": ([{"kind": "mass_cut", "log_mbh_min": 8.3},
                                       {"kind": "mass_cut", "log_mbh_min": 8.8, "width": 0.3}], Z_HIGH),
    "two hard observed (merged)": ([{"kind": "mass_cut", "log_mbh_min": 8.3},
                                    {"kind": "mass_cut", "log_mbh_min": 8.7}], Z_HIGH),
    "hard intrinsic x hard observed": ([{"kind": "mass_cut", "log_mbh_min": 8.5, "on": "intrinsic"},
                                        {"kind": "mass_cut", "log_mbh_min": 8.6}], Z_HIGH),
}


def compiled(spec, z):
    return SelectionSet.from_arrays({"s": spec}, z=z, log_mstar=np.full(len(z), 11.0), sample="s",
                                    cosmo=Planck18)


def monte_carlo(spec, z, rng, n=N_MC):
    """Draw m, m_obs per object and apply each cut with its own noise, written out here."""
    m = MU + np.sqrt(VAR) * rng.standard_normal((n, 3))
    m_obs = m + DELTA + ERR * rng.standard_normal((n, 3))
    keep = np.ones((n, 3), dtype=bool)
    for model in build_selection(spec):
        lim, width = model.threshold(z, np.full(3, 11.0), Planck18)
        value = m if model.on == "intrinsic" else m_obs
        keep &= value - width * rng.standard_normal((n, 3)) >= lim
    return m_obs, keep


def observed_factor(spec, z, m_obs):
    """The θ-free factor the likelihood drops: product of observed-mass probits at m_obs."""
    out = np.ones_like(m_obs)
    for model in build_selection(spec):
        if model.on == "observed":
            lim, width = model.threshold(z, 11.0, Planck18)
            out = out * (stats.norm.cdf((m_obs - lim) / width) if width[0] > 0 else (m_obs >= lim))
    return out


@pytest.mark.parametrize("name", list(CASES))
def test_probability_matches_monte_carlo(name):
    spec, z = CASES[name]
    rng = np.random.default_rng(zlib.crc32(name.encode()))
    _, keep = monte_carlo(spec, z, rng)
    analytic = compiled(spec, z).probability(MU, DELTA, VAR, ERR)
    fraction = keep.mean(axis=0)
    error = np.sqrt(analytic * (1 - analytic) / N_MC) + 1e-12
    assert np.all(analytic > 1e-3) and np.all(analytic < 0.999)  # the cases are not trivial
    assert np.all(np.abs(fraction - analytic) < 4 * error), (fraction, analytic)


@pytest.mark.parametrize("name", list(CASES))
def test_selected_density_matches_monte_carlo(name):
    """p(m_obs | S) = N(m_obs; mu+delta, var+err²) exp(log_correction) x (dropped θ-free factor)."""
    spec, z = CASES[name]
    rng = np.random.default_rng(zlib.crc32(name.encode()) + 1)
    m_obs, keep = monte_carlo(spec, z, rng)
    for i in range(3):
        grid = np.linspace(MU[i] + DELTA[i] - 9, MU[i] + DELTA[i] + 9, 36001)
        cuts = compiled(spec, np.full(len(grid), z[i]))
        total = VAR[i] + ERR[i] ** 2
        density = (stats.norm.pdf(grid, MU[i] + DELTA[i], np.sqrt(total))
                   * np.exp(cuts.log_correction(MU[i], DELTA[i], VAR[i], grid, ERR[i]))
                   * observed_factor(spec, np.full(len(grid), z[i]), grid))
        cumulative = integrate.cumulative_trapezoid(density, grid, initial=0.0)
        assert cumulative[-1] == pytest.approx(1.0, abs=2e-3)  # normaliser and numerator agree
        selected = m_obs[keep[:, i], i]
        edges = np.quantile(selected, [0.1, 0.3, 0.5, 0.7, 0.9])
        expected = np.diff(np.interp(edges, grid, cumulative)) / cumulative[-1]
        observed = np.diff(np.searchsorted(np.sort(selected), edges)) / len(selected)
        error = np.sqrt(expected * (1 - expected) / len(selected))
        assert np.all(np.abs(observed - expected) < 4 * error + 1e-4), (i, observed, expected)


def test_two_intrinsic_cuts_numerator_is_the_selected_fraction_given_m_obs():
    """For intrinsic cuts, exp(numerator) = P(S | m_obs): Monte Carlo of m | m_obs, both cuts drawn."""
    spec, z = CASES["soi x intrinsic soft"]
    cuts = compiled(spec, z)
    m_obs = np.array([8.3, 8.9, 9.1])
    rng = np.random.default_rng(11)
    total = VAR + ERR**2
    v, mu_p = VAR * ERR**2 / total, (MU * ERR**2 + (m_obs - DELTA) * VAR) / total
    m = mu_p + np.sqrt(v) * rng.standard_normal((N_MC, 3))
    keep = np.ones((N_MC, 3), dtype=bool)
    for model in build_selection(spec):
        lim, width = model.threshold(z, np.full(3, 11.0), Planck18)
        keep &= m - width * rng.standard_normal((N_MC, 3)) >= lim
    numerator = np.exp(cuts.log_correction(MU, DELTA, VAR, m_obs, ERR)
                       + cuts.log_probability(MU, DELTA, VAR, ERR))
    error = np.sqrt(numerator * (1 - numerator) / N_MC)
    assert np.all(np.abs(keep.mean(axis=0) - numerator) < 4 * error)


def test_hard_cut_is_the_limit_of_a_narrow_probit():
    hard = compiled({"kind": "mass_cut", "log_mbh_min": 8.5, "on": "intrinsic"}, Z_HIGH)
    narrow = compiled({"kind": "mass_cut", "log_mbh_min": 8.5, "on": "intrinsic", "width": 1e-7}, Z_HIGH)
    m_obs = np.array([8.1, 8.6, 9.3])
    for args in ((MU, DELTA, VAR, m_obs, ERR),):
        assert np.allclose(hard.log_correction(*args), narrow.log_correction(*args), atol=1e-6)
    assert np.allclose(hard.probability(MU, DELTA, VAR, ERR), stats.norm.cdf((MU - 8.5) / np.sqrt(VAR)))


def test_flux_threshold_against_hand_computation():
    # Eddington luminosity per Msun 1.257e38 erg/s ([computed] with astropy constants)
    assert L_EDD_PER_MSUN == pytest.approx(1.257e38, rel=5e-4)
    model = build_selection({"kind": "flux_limit", "flux_limit": 1e-12, "bolometric_correction": 10.0})[0]
    z = 0.7
    lim, width = model.threshold(np.array([z]), np.array([11.0]), Planck18)
    # By hand: a black hole at the threshold radiating at the peak Eddington ratio 1/4 (Kollmeier et
    # al. 2006) has band flux F = 0.25 L_Edd M / (BC 4π d_L²) equal to the limit.
    d_l = Planck18.luminosity_distance(z).to_value(u.cm)
    flux = 0.25 * 1.257e38 * 10 ** lim[0] / (10.0 * 4 * np.pi * d_l**2)
    assert flux == pytest.approx(1e-12, rel=5e-4)
    assert width[0] == 0.3  # Kollmeier et al. 2006: 0.3 dex [paper, abstract]
    by_hand = np.log10(10 * 4 * np.pi * d_l**2 * 1e-12 / 1.257e38) + np.log10(4)
    assert lim[0] == pytest.approx(by_hand, abs=3e-4)


def test_flux_probit_is_the_eddington_ratio_distribution():
    """P(F >= F_lim | m) with log λ ~ N(mean, width²) drawn, against Φ((m - m_lim)/w)."""
    model = build_selection({"kind": "flux_limit", "flux_limit": 1e-13, "log_edd_mean": -1.2,
                             "log_edd_width": 0.4})[0]
    z, m = 1.2, np.array([7.5, 8.0, 8.5])
    lim, width = model.threshold(np.full(3, z), np.full(3, 11.0), Planck18)
    rng = np.random.default_rng(5)
    log_lambda = rng.normal(-1.2, 0.4, (N_MC, 1))
    d_l = Planck18.luminosity_distance(z).to_value(u.cm)
    flux = 10**log_lambda * L_EDD_PER_MSUN * 10**m / (4 * np.pi * d_l**2)
    expected = stats.norm.cdf((m - lim) / width)
    error = np.sqrt(expected * (1 - expected) / N_MC)
    assert np.all(np.abs((flux >= 1e-13).mean(axis=0) - expected) < 4 * error)


def test_sphere_of_influence_threshold_against_hand_computation():
    # r_inf = G M / σ² = 47.79 pc for 1e9 Msun at 300 km/s ([computed] with astropy constants)
    assert G_PC_KMS2_PER_MSUN * 1e9 / 300.0**2 == pytest.approx(47.79, abs=0.01)
    model = build_selection({"kind": "sphere_of_influence"})[0]
    z = np.array([0.003, 0.02])
    lim, width = model.threshold(z, np.full(2, 11.0), Planck18)
    # By hand: at the threshold, σ from Kormendy & Ho 2013 (8.49, 4.38, 200 km/s;
    # [transcribed]) gives
    # r_inf / D_A = 0.1 arcsec (HST-class resolution, common practice).
    sigma = 200.0 * 10 ** ((lim - 8.49) / 4.38)
    r_inf_pc = 4.3009e-3 * 10**lim / sigma**2  # G in pc (km/s)² / Msun (computed with astropy constants)
    d_a_pc = Planck18.angular_diameter_distance(z).to_value(u.pc)
    assert np.allclose(r_inf_pc / d_a_pc * 206264.806, 0.1, rtol=1e-4)  # 206264.806″ per radian
    assert np.allclose(width, 2 * 0.29 / (4.38 - 2))  # the derived width, not the M-σ scatter


def test_sphere_of_influence_probit_is_the_msigma_scatter():
    """Resolved fraction with σ drawn from the M-σ relation's scatter, against Φ((m - m_lim)/w)."""
    model = build_selection({"kind": "sphere_of_influence", "resolution_arcsec": 0.05})[0]
    z, m = 0.01, np.array([7.9, 8.3, 8.7])
    lim, width = model.threshold(np.full(3, z), np.full(3, 11.0), Planck18)
    rng = np.random.default_rng(6)
    eps = rng.normal(0.0, 0.29, (N_MC, 1))
    sigma = 200.0 * 10 ** ((m - 8.49 - eps) / 4.38)
    theta_arcsec = G_PC_KMS2_PER_MSUN * 10**m / sigma**2 / (
        Planck18.angular_diameter_distance(z).to_value(u.pc)) * 206264.806
    expected = stats.norm.cdf((m - lim) / width)
    error = np.sqrt(expected * (1 - expected) / N_MC)
    assert np.all(np.abs((theta_arcsec >= 0.05).mean(axis=0) - expected) < 4 * error)


def test_distance_table_matches_astropy():
    z = np.random.default_rng(2).uniform(0.0, 10.0, 3000)
    for function in ("luminosity_distance", "angular_diameter_distance"):
        direct = getattr(Planck18, function)(z).to_value(u.Mpc)
        fast = _distance(lambda c, zz: getattr(c, function)(zz).to_value(u.Mpc), Planck18, z)
        assert np.allclose(fast, direct, rtol=2e-6)


def test_log_correction_broadcasts_and_leaves_other_samples_alone():
    rng = np.random.default_rng(3)
    n, walkers = 8, 5
    sample = np.array(["a", "b"] * 4, dtype=object)
    cuts = SelectionSet.from_arrays({"a": {"kind": "mass_cut", "log_mbh_min": 8.4}}, z=np.full(n, 1.0),
                                    log_mstar=np.full(n, 11.0), sample=sample, cosmo=Planck18)
    mu = rng.normal(8.5, 0.3, (walkers, n))
    var = np.full((walkers, n), 0.1)
    out = cuts.log_correction(mu, 0.0, var, np.full(n, 8.6), np.full(n, 0.2))
    assert out.shape == (walkers, n)
    assert np.all(out[:, 1::2] == 0.0) and np.all(out[:, 0::2] > 0.0)
    per_walker = cuts.log_correction(mu, np.zeros((walkers, n)), var, np.full(n, 8.6), np.full(n, 0.2))
    assert np.array_equal(out, per_walker)
    expected = -log_ndtr((mu[:, 0::2] - 8.4) / np.sqrt(0.1 + 0.04))
    assert np.allclose(out[:, 0::2], expected, atol=1e-9)
    assert cuts.has_selection and cuts.corrects_likelihood


def test_draw_selected_matches_probability_with_a_host_cut():
    n = 200_000
    spec = [{"kind": "flux_limit", "flux_limit": 1e-14, "bolometric_correction": 10.0},
            {"kind": "host_mass_cut", "log_mstar_min": 10.8}]
    rng = np.random.default_rng(8)
    host = rng.normal(11.0, 0.3, 2)
    rows = np.repeat([0, 1], n)
    cuts = SelectionSet.from_arrays({"s": spec}, z=np.array([0.8, 1.5]), log_mstar=host, sample="s",
                                    cosmo=Planck18)
    m = MU[1] + np.sqrt(VAR[1]) * rng.standard_normal(2 * n)
    keep = cuts.draw_selected(m, m + 0.1 * rng.standard_normal(2 * n), rng, rows=rows)
    analytic = cuts.probability(MU[1], 0.0, VAR[1], 0.1)
    fraction = np.array([keep[rows == i].mean() for i in range(2)])
    error = np.sqrt(analytic * (1 - analytic) / n) + 1e-12
    assert np.all(np.abs(fraction - analytic) < 4 * error)
    assert np.array_equal(analytic == 0, host < 10.8)


def test_rows_failing_hard_observed_cuts_are_reported():
    from cosmogrow.data.catalog import Catalog

    catalog = Catalog.from_columns(z=[0.5, 0.5, 0.5], log_mbh=[8.0, 8.5, 9.0], log_mbh_err=[0.1] * 3,
                                   log_mstar=[11.0, 10.0, 11.0], log_mstar_err=[0.1] * 3, sample="s")
    spec = [{"kind": "mass_cut", "log_mbh_min": 8.4}, {"kind": "host_mass_cut", "log_mstar_min": 10.5}]
    cuts = SelectionSet.compile({"s": spec}, catalog, Planck18)
    assert cuts.rows_failing_hard_cuts.tolist() == [0, 1]
    described = cuts.describe()[0]
    assert described["n_rows"] == 3 and described["selection"][0]["threshold_min"] == 8.4
    soi = SelectionSet.from_arrays({"s": {"kind": "sphere_of_influence"}}, z=np.array([0.01]),
                                   log_mstar=np.array([11.0]), sample="s", cosmo=Planck18)
    entry = soi.describe()[0]["selection"][0]
    assert entry["on"] == "intrinsic" and entry["probit_width"] == pytest.approx(0.2437, abs=1e-4)
    # to_dict reads back
    assert build_selection(build_selection({"kind": "sphere_of_influence"})[0].to_dict())[0].width == \
        pytest.approx(0.2437, abs=1e-4)


def test_log_phi_matches_log_ndtr():
    x = np.linspace(-60.0, 15.0, 400_001)
    assert np.max(np.abs(log_phi(x) - log_ndtr(x))) < 1e-10
    assert log_phi(-np.inf) == -np.inf and -1e-20 < log_phi(np.inf) <= 0.0


@pytest.mark.parametrize("rho", [0.0, 0.2, 0.6, 0.9, 0.95, 0.999])
def test_upper_orthant_against_quadrature(rho):
    """P(X > h, Y > k) = ∫_h^∞ φ(t) Φ((ρt - k)/√(1-ρ²)) dt by adaptive quadrature."""
    for h, k in [(-3.0, 1.0), (0.5, 0.2), (2.0, 4.0), (6.0, 5.5), (-1.0, -2.0), (9.0, 6.5)]:
        top, other = max(h, k), min(h, k)
        scale = np.sqrt(1 - rho**2)

        def integrand(t):
            return np.exp(-0.5 * (t**2 - top**2) + log_ndtr((rho * t - other) / scale)) / np.sqrt(2 * np.pi)

        value = integrate.quad(integrand, top, np.inf, epsabs=0, epsrel=1e-12, limit=400)[0]
        assert log_upper_orthant(h, k, rho) == pytest.approx(np.log(value) - 0.5 * top**2, abs=1e-7)


@pytest.mark.parametrize("spec, message", [
    ("mass_cut", r"sample 'bright': selection: expected a table with 'kind'"),
    ({"log_mbh_min": 8.0}, r"sample 'bright': selection: missing key 'kind'; expected one of mass_cut, "
                           r"flux_limit, sphere_of_influence, host_mass_cut"),
    ({"kind": "mass-cut"}, r"unknown kind 'mass-cut'; expected one of mass_cut, flux_limit"),
    ({"kind": "mass_cut", "log_mbh_min": 8, "log_mbh_max": 9},
     r"unknown key\(s\) 'log_mbh_max' for kind 'mass_cut'; expected some of log_mbh_min, on, width"),
    ({"kind": "mass_cut"}, r"kind 'mass_cut' needs key\(s\) 'log_mbh_min'"),
    ({"kind": "flux_limit"}, r"kind 'flux_limit' needs key\(s\) 'flux_limit'"),
    ({"kind": "host_mass_cut"}, r"needs key\(s\) 'log_mstar_min'"),
    ({"kind": "mass_cut", "log_mbh_min": 8, "on": "latent"},
     r"key 'on': expected one of observed, intrinsic, got 'latent'"),
    ({"kind": "mass_cut", "log_mbh_min": 8, "width": -0.1}, r"key 'width': expected a number >= 0"),
    ({"kind": "mass_cut", "log_mbh_min": True}, r"key 'log_mbh_min': expected a number, got True"),
    ({"kind": "mass_cut", "log_mbh_min": float("nan")}, r"key 'log_mbh_min': expected a number"),
    ({"kind": "flux_limit", "flux_limit": 0.0}, r"key 'flux_limit': expected a positive flux"),
    ({"kind": "flux_limit", "flux_limit": 1e-13, "bolometric_correction": -2},
     r"key 'bolometric_correction': expected a positive number"),
    ({"kind": "flux_limit", "flux_limit": 1e-13, "log_edd_width": -0.3}, r"key 'log_edd_width'"),
    ({"kind": "sphere_of_influence", "msigma_slope": 2.0}, r"key 'msigma_slope': expected a slope > 2"),
    ({"kind": "sphere_of_influence", "resolution_arcsec": 0},
     r"key 'resolution_arcsec': expected a positive"),
    ({"kind": "sphere_of_influence", "msigma_scatter": -1}, r"key 'msigma_scatter'"),
    ({"kind": "sphere_of_influence", "sigma_pivot": 0}, r"key 'sigma_pivot': expected a positive"),
    ({"kind": "sphere_of_influence", "width": 0.3},
     r"unknown key\(s\) 'width' for kind 'sphere_of_influence'"),
    ([{"kind": "mass_cut", "log_mbh_min": 8}, {"kind": "nope"}],
     r"sample 'bright': selection\[1\]: unknown kind"),
])
def test_build_selection_errors(spec, message):
    with pytest.raises(ConfigError, match=message):
        build_selection(spec, where="sample 'bright'")


def test_compile_errors():
    z, host = np.full(4, 0.5), np.full(4, 11.0)
    sample = np.array(["a", "a", "b", "b"], dtype=object)
    with pytest.raises(ConfigError, match=r"sample 'c': a selection is given but the catalogue has no such "
                                          r"sample; samples: a, b"):
        SelectionSet.from_arrays({"c": {"kind": "mass_cut", "log_mbh_min": 8}}, z=z, log_mstar=host,
                                 sample=sample, cosmo=Planck18)
    three = [{"kind": "mass_cut", "log_mbh_min": 8, "width": 0.1},
             {"kind": "mass_cut", "log_mbh_min": 8.2, "width": 0.2},
             {"kind": "flux_limit", "flux_limit": 1e-13}]
    with pytest.raises(ConfigError, match=r"sample 'a': 3 cuts act on the black-hole mass .* at most two"):
        SelectionSet.from_arrays({"a": three}, z=z, log_mstar=host, sample=sample, cosmo=Planck18)
    with pytest.raises(ConfigError, match=r"sample 'b': selection: unknown kind 'x'"):
        SelectionSet.from_arrays({"b": {"kind": "x"}}, z=z, log_mstar=host, sample=sample, cosmo=Planck18)
