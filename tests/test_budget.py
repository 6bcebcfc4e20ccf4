"""Star formation, IMFs and the dark-energy budget of a coupled black-hole population."""

import json

import numpy as np
import pytest
from astropy import units as u
from astropy.cosmology import FlatLambdaCDM, Planck18
from scipy import integrate, optimize

from cosmogrow.cli import dispatch as cli
from cosmogrow.consequences import budget, imf, sfr
from cosmogrow.errors import ConfigError, InputError

# Madau & Dickinson 2014 fit their model in a flat cosmology with h = 0.7, Omega_m = 0.3 [paper].
MD14_COSMOLOGY = FlatLambdaCDM(H0=70.0, Om0=0.3)
MD14_SFR = sfr.madau_dickinson_2014  # Madau & Dickinson 2014, Eq. 15 [paper]
MD14_RETURN_FRACTION = 0.27  # Madau & Dickinson 2014, instantaneous-recycling return fraction [paper]


# --- star-formation-rate density --------------------------------------------------------------

def test_md14_peak_redshift_near_1p9():
    # Madau & Dickinson 2014, abstract: star formation peaked near z ≈ 1.9 [paper].
    best = optimize.minimize_scalar(lambda z: -sfr.madau_dickinson_2014(z), bounds=(0, 6), method="bounded")
    assert best.x == pytest.approx(1.9, abs=0.1)


def test_md14_stellar_mass_density_today():
    # (1 - R) ∫ psi dt with R = 0.27 gives the model's stellar density today, 5.8e8 Msun Mpc^-3
    # (Madau & Dickinson 2014 [paper]); 5.76e8 [computed with astropy] pins the convention.
    history = budget.formation_history(MD14_COSMOLOGY, MD14_SFR, eps_bh=1 - MD14_RETURN_FRACTION)
    rho_star = budget.comoving_density(history, 0.0)
    assert rho_star == pytest.approx(5.8e8, rel=0.03)
    assert rho_star == pytest.approx(5.76e8, rel=2e-3)


def test_md14_half_of_stars_before_z_1p3_quarter_after_0p7():
    # Madau & Dickinson 2014, abstract: half of the stellar mass formed before z ≈ 1.3, 25 % after
    # z ≈ 0.7 [paper]. With k = 0 the comoving density at z is the mass formed before z.
    history = budget.formation_history(MD14_COSMOLOGY, MD14_SFR, eps_bh=1.0)
    today, at_07, at_13 = budget.comoving_density(history, 0.0, [0.0, 0.7, 1.3])
    assert at_13 / today == pytest.approx(0.5, abs=0.02)
    assert 1 - at_07 / today == pytest.approx(0.25, abs=0.02)


def write_table(path, rows, header="z,psi"):
    path.write_text(header + "\n" + "\n".join(",".join(str(v) for v in row) for row in rows) + "\n")
    return path


def test_sfr_table_interpolates_log_linearly_and_is_zero_outside(tmp_path):
    path = write_table(tmp_path / "sfr.csv", [(3, 0.08), (0, 0.01), (1, 0.04)])  # unsorted on purpose
    table = sfr.read_sfr_table(path)
    np.testing.assert_allclose(table([0, 1, 3]), [0.01, 0.04, 0.08])
    # Midway in z the geometric mean of the two nodes (log-linear interpolation).
    assert float(table(0.5)) == pytest.approx(np.sqrt(0.01 * 0.04), rel=1e-12)
    assert float(table(2.0)) == pytest.approx(np.sqrt(0.04 * 0.08), rel=1e-12)
    np.testing.assert_array_equal(table([3.0001, 10.0]), 0.0)
    # A zero node: linear interpolation towards it.
    zero = sfr.TabulatedSfr(z=[0, 1, 2], psi=[0.02, 0.0, 0.04])
    assert float(zero(0.5)) == pytest.approx(0.01)


@pytest.mark.parametrize("rows, header, match", [
    ([(0, 0.01), (1, 0.02)], "z,rate", "column 'psi': missing column"),
    ([(0, 0.01), (1, -0.02)], "z,psi", "row 2, column 'psi', value '-0.02': expected a finite value >= 0"),
    ([(0, 0.01), ("one", 0.02)], "z,psi", "row 2, column 'z', value 'one': expected a number"),
    ([(0, 0.01), (1, "nan")], "z,psi", "row 2, column 'psi', value 'nan'"),
    ([(1, 0.01), (1, 0.02)], "z,psi", "row 2, column 'z', value 1.0: redshift repeated"),
    ([(1, 0.01)], "z,psi", "expected at least 2 data rows"),
])
def test_sfr_table_errors_name_file_row_column_value(tmp_path, rows, header, match):
    path = write_table(tmp_path / "bad.csv", rows, header)
    with pytest.raises(InputError, match=match) as info:
        sfr.read_sfr_table(path)
    assert str(path) in str(info.value)


def test_sfr_table_missing_file(tmp_path):
    with pytest.raises(InputError, match="file not found"):
        sfr.read_sfr_table(tmp_path / "none.csv")


# --- initial mass functions --------------------------------------------------------------------

@pytest.mark.parametrize("m_min", [8.0, 20.0, 25.0, 40.0])
def test_salpeter_mass_fraction_matches_analytic(m_min):
    # Salpeter analytic: f(>m) = (100^-0.35 - m^-0.35) / (100^-0.35 - 0.1^-0.35).
    expected = (100**-0.35 - m_min**-0.35) / (100**-0.35 - 0.1**-0.35)
    assert imf.salpeter().mass_fraction_above(m_min) == pytest.approx(expected, rel=1e-9)


@pytest.mark.parametrize("name, m_min, expected", [
    # [computed; Salpeter also analytic]: mass fraction above 20 / 25 Msun.
    ("salpeter", 20.0, 0.0740), ("salpeter", 25.0, 0.0611),
    ("kroupa", 20.0, 0.1145), ("kroupa", 25.0, 0.0952),
])
def test_imf_mass_fractions_reference_values(name, m_min, expected):
    assert imf.get_imf(name).mass_fraction_above(m_min) == pytest.approx(expected, abs=6e-5)


def test_imf_normalised_continuous_and_number_per_mass():
    kroupa = imf.kroupa()
    total, _ = integrate.quad(lambda m: m * kroupa.dn_dm(m), 0.08, 100, points=[0.5], limit=200)
    assert total == pytest.approx(1.0, rel=1e-8)
    # Kroupa 2001 is continuous at its 0.5 Msun break [paper].
    assert kroupa.dn_dm(0.5 - 1e-9) == pytest.approx(kroupa.dn_dm(0.5 + 1e-9), rel=1e-6)
    # Salpeter number of stars above m per Msun formed, analytic: ∫ m^-2.35 / ∫ m^-1.35.
    number = (20**-1.35 - 100**-1.35) / 1.35 / ((0.1**-0.35 - 100**-0.35) / 0.35)
    assert imf.salpeter().number_per_mass(20.0) == pytest.approx(number, rel=1e-9)


def test_eps_bh_is_fraction_times_remnant_fraction():
    value = imf.eps_bh("kroupa", 25.0, 0.5)
    assert value == pytest.approx(0.5 * imf.kroupa().mass_fraction_above(25.0), rel=1e-12)


@pytest.mark.parametrize("call, match", [
    (lambda: imf.get_imf("chabrier"), "unknown name 'chabrier'; expected one of salpeter, kroupa"),
    (lambda: imf.eps_bh("salpeter", 20.0, 1.5), r"remnant fraction: expected a value in \(0, 1\]"),
    (lambda: imf.eps_bh("salpeter", 150.0, 0.3), "minimum progenitor mass: expected a value in"),
    (lambda: imf.Imf("x", (1.0,), (2.0,), 0.1, 10.0), "expected 2 slopes for 1 breaks"),
])
def test_imf_config_errors(call, match):
    with pytest.raises(ConfigError, match=match):
        call()


# --- the budget integral -----------------------------------------------------------------------

def independent_density(cosmo, eps, k, z=0.0, z_floor=0.0, z_max=20.0):
    """eps ∫ psi(z_f) ((1+z_f)/(1+z))^k dt, dt = dz / ((1+z) H), by quad directly over z_f."""
    def integrand(zf):
        hubble = cosmo.H(zf).to_value(1 / u.yr)
        return sfr.madau_dickinson_2014(zf) * ((1 + zf) / (1 + z)) ** k / ((1 + zf) * hubble)

    value, _ = integrate.quad(integrand, max(z, z_floor), z_max, epsabs=0, epsrel=1e-11, limit=400)
    return eps * value


@pytest.mark.parametrize("k", [0.0, 3.0, -1.0])
@pytest.mark.parametrize("z, z_floor", [(0.0, 0.0), (2.0, 0.0), (0.5, 3.0), (4.0, 3.0)])
def test_budget_integral_against_quadrature(k, z, z_floor):
    history = budget.formation_history(Planck18, MD14_SFR, eps_bh=0.01, z_floor=z_floor)
    got = budget.comoving_density(history, k, z)
    # Trapezoid on 2049 nodes in ln(1+z): relative error ~2e-6 at worst here.
    assert got == pytest.approx(independent_density(Planck18, 0.01, k, z, z_floor), rel=1e-5)


def test_vectorised_over_k_and_z_matches_scalar_calls(monkeypatch):
    monkeypatch.setattr(budget, "_CHUNK_ELEMENTS", 3 * 2049)  # force several chunks of k
    history = budget.formation_history(Planck18, MD14_SFR, eps_bh=0.01)
    ks = np.linspace(-1, 5, 8)
    zs = np.array([0.0, 0.3, 2.5, 19.0, 25.0])
    table = budget.comoving_density(history, ks, zs)
    assert table.shape == (8, 5)
    for i, k in enumerate(ks):
        for j, z in enumerate(zs):
            assert table[i, j] == pytest.approx(budget.comoving_density(history, k, z), rel=1e-12)
    np.testing.assert_array_equal(table[:, -1], 0.0)  # nothing formed yet beyond z_max = 20


# --- single cohort and the effective equation of state ------------------------------------------

@pytest.mark.parametrize("k", [0.0, 1.0, 3.0, 4.5])
def test_frozen_population_scales_as_a_to_k_minus_3(k):
    # After formation stops (z < z_floor) the population is a fixed set of cohorts:
    # rho_phys ∝ a^(k-3), so k = 0 dilutes as a^-3 and k = 3 keeps a constant physical density,
    # and w_eff = -k/3 (Croker & Weiner 2019, ApJ 882, 19 [paper]).
    history = budget.formation_history(Planck18, MD14_SFR, eps_bh=0.01, z_floor=5.0, z_max=6.0)
    z = np.array([0.0, 0.5, 1.0, 2.0, 4.0])
    rho = budget.physical_density(history, k, z)
    a = 1 / (1 + z)
    np.testing.assert_allclose(rho / rho[0], a ** (k - 3), rtol=1e-12)
    np.testing.assert_allclose(budget.effective_w(history, k, z), -k / 3, atol=1e-12)


def test_single_cohort_function():
    z = np.array([0.0, 1.0, 3.0, 6.0])
    rho = budget.single_cohort_physical_density(10.0, 5.0, z, 3.0)
    np.testing.assert_allclose(rho[:3], 10.0 * 6.0**3)  # constant physical density for k = 3
    assert rho[3] == 0.0  # before the cohort formed
    diluted = budget.single_cohort_physical_density(10.0, 5.0, z[:3], 0.0)
    np.testing.assert_allclose(diluted, 10.0 * (1 + z[:3]) ** 3)  # k = 0: rho_c constant, rho ∝ a^-3


@pytest.mark.parametrize("k", [0.0, 3.0])
def test_w_eff_with_ongoing_formation_matches_numerical_derivative(k):
    history = budget.formation_history(Planck18, MD14_SFR, eps_bh=0.01, n_grid=8193)
    log_a = np.linspace(-np.log(8.0), -np.log(1.2), 4001)
    z = np.exp(-log_a) - 1
    log_rho = np.log(budget.physical_density(history, k, z))
    numerical = -1 - np.gradient(log_rho, log_a) / 3
    exact = budget.effective_w(history, k, z)
    np.testing.assert_allclose(exact[5:-5], numerical[5:-5], atol=2e-4)
    assert np.isnan(budget.effective_w(history, k, 25.0))  # no population before z_max


def test_omega_bh_and_critical_density():
    # rho_crit,0 = 2.775e11 h^2 Msun Mpc^-3 (common practice [memory]).
    h = Planck18.H0.value / 100
    assert budget.critical_density0_msun_mpc3(Planck18) == pytest.approx(2.775e11 * h**2, rel=1e-3)
    history = budget.formation_history(Planck18, MD14_SFR, eps_bh=0.01)
    result = budget.evaluate_budget(history, np.array([0.0, 3.0]), Planck18)
    expected = np.array([independent_density(Planck18, 0.01, k) for k in (0.0, 3.0)])
    np.testing.assert_allclose(result["omega_bh"], expected / result["rho_crit0"], rtol=2e-6)
    assert result["omega_lambda"] == pytest.approx(Planck18.Ode0)
    np.testing.assert_allclose(result["fraction_of_lambda"], result["omega_bh"] / Planck18.Ode0)


def test_budget_curve_posterior_percentiles():
    history = budget.formation_history(Planck18, MD14_SFR, eps_bh=0.01)
    chain = np.random.default_rng(7).normal(3.0, 0.5, 3000)
    curve = budget.budget_curve(history, chain, Planck18, z=[0.0, 1.0])
    # rho_BH rises with k at every z, so its percentiles are those of k (over the thinned chain).
    for name, q in (("rho_bh_physical", 50), ("rho_bh_physical_p16", 16), ("rho_bh_physical_p84", 84)):
        k_q = np.percentile(budget.thin_by_quantile(chain), q)
        assert curve[name][1] == pytest.approx(budget.physical_density(history, k_q, 1.0), rel=2e-3)
    assert curve["rho_de_physical"][0] == pytest.approx(
        Planck18.Ode0 * budget.critical_density0_msun_mpc3(Planck18))


@pytest.mark.parametrize("kwargs, match", [
    ({"eps_bh": 0.0}, "eps_BH: expected a positive number"),
    ({"eps_bh": 0.01, "z_floor": 5.0, "z_max": 4.0}, "expected 0 <= z_floor < z_max"),
    ({"eps_bh": 0.01, "z_floor": -1.0}, "expected 0 <= z_floor < z_max"),
])
def test_formation_window_errors(kwargs, match):
    with pytest.raises(ConfigError, match=match):
        budget.formation_history(Planck18, MD14_SFR, **kwargs)


# --- command line ------------------------------------------------------------------------------

@pytest.fixture
def only_physics_commands(monkeypatch):
    """Build the CLI with this issue's commands only, so other commands' work in progress cannot
    break these tests; the parser, error handling and exit codes are cli.main's own."""
    monkeypatch.setattr(cli, "COMMANDS", ("budget", "remnants"))


def write_chain(fit_dir, k):
    fit_dir.mkdir()
    np.savez(fit_dir / "samples.npz", k=np.asarray(k, dtype=float))
    return fit_dir


def test_cli_budget_writes_json_curve_and_figure(tmp_path, only_physics_commands):
    out = tmp_path / "out"
    assert cli.main(["budget", "--k", "3", "--cosmology", "Planck18", "--out", str(out)]) == 0
    report = json.loads((out / "budget.json").read_text())
    eps = imf.eps_bh("salpeter", 20.0, 0.3)
    expected = independent_density(Planck18, eps, 3.0) / budget.critical_density0_msun_mpc3(Planck18)
    assert report["omega_bh"] == pytest.approx(expected, rel=2e-6)
    assert report["eps_bh"] == pytest.approx(eps)
    for key in ("omega_lambda", "rho_bh_comoving_today", "k", "fraction_of_lambda", "inputs", "assumptions"):
        assert key in report
    header = (out / "budget_curve.csv").read_text().splitlines()[0].split(",")
    assert {"z", "rho_bh_physical", "w_eff", "rho_de_physical"} <= set(header)
    assert (out / "budget.png").stat().st_size > 10_000


def test_cli_budget_posterior_summary(tmp_path, only_physics_commands):
    chain = np.random.default_rng(3).normal(2.5, 0.7, 400)
    fit_dir = write_chain(tmp_path / "fit", chain)
    out = tmp_path / "out"
    assert cli.main(["budget", "--posterior", str(fit_dir), "--eps-bh", "0.01", "--z-floor", "1",
                     "--out", str(out)]) == 0
    report = json.loads((out / "budget.json").read_text())
    assert report["k_summary"]["median"] == pytest.approx(np.median(chain))
    history = budget.formation_history(Planck18, MD14_SFR, eps_bh=0.01, z_floor=1.0)
    omega = budget.evaluate_budget(history, chain, Planck18)["omega_bh"]
    summary = report["omega_bh_summary"]
    for key, q in (("p2_5", 2.5), ("p16", 16), ("median", 50), ("p84", 84), ("p97_5", 97.5)):
        assert summary[key] == pytest.approx(np.percentile(omega, q), rel=1e-9)
    assert report["omega_bh"] == summary["median"]


@pytest.mark.parametrize("make_args, match", [
    (lambda d: ["--k", "3", "--sfr-table", str(write_table(d / "s.csv", [(0, 0.01), (1, 0.02)], "z,rate"))],
     "column 'psi': missing column"),
    (lambda d: ["--k", "3", "--sfr-table", str(write_table(d / "s.csv", [(0, 0.01), (1, -2)]))],
     "row 2, column 'psi'"),
    (lambda d: ["--posterior", str(d / "nofit")], "not a directory"),
    (lambda d: ["--k", "3", "--eps-bh", "0.01", "--imf", "kroupa"], "not both"),
    (lambda d: ["--k", "3", "--remnant-fraction", "2"], r"--remnant-fraction: expected a finite number > 0 and <= 1"),
    (lambda d: ["--k", "3", "--z-floor", "30"], r"--z-floor: expected below --z-max"),
    (lambda d: ["--k", "3", "--cosmology", "Planck99"], "unknown realisation 'Planck99'"),
])
def test_cli_budget_bad_input_exit_2_one_line_nothing_written(tmp_path, capsys, only_physics_commands,
                                                             make_args, match):
    out = tmp_path / "out"
    code = cli.main(["budget", *make_args(tmp_path), "--out", str(out)])
    err = capsys.readouterr().err.strip()
    assert code == 2
    assert len(err.splitlines()) == 1 and err.startswith("cosmogrow budget: error:")
    assert match in err
    assert not out.exists()


def test_cli_budget_posterior_without_k_array(tmp_path, capsys, only_physics_commands):
    fit_dir = tmp_path / "fit"
    fit_dir.mkdir()
    np.savez(fit_dir / "samples.npz", alpha=np.ones(3))
    assert cli.main(["budget", "--posterior", str(fit_dir), "--out", str(tmp_path / "out")]) == 2
    assert "no array 'k'; found alpha" in capsys.readouterr().err
