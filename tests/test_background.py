"""The background against published values and closed forms (sources beside each value)."""

import numpy as np
import pytest

from cosmogrow import background
from cosmogrow.background import get_cosmology
from cosmogrow.errors import ConfigError

D_H70 = 299792.458 / 70.0  # Hubble distance c/H0 for H0 = 70, Mpc


def test_planck18_age_matches_paper():
    # Planck Collaboration 2020, A&A 641, A6, Table 2 (TT,TE,EE+lowE+lensing+BAO): 13.787 ± 0.020 Gyr
    cosmo = background.get_cosmology("Planck18")
    assert abs(background.age_gyr(cosmo, 0.0) - 13.787) < 0.020


def test_planck18_matter_density_with_neutrinos():
    # Planck 2018 Table 2: Omega_m = 0.3111 ± 0.0056; astropy's Om0 excludes the massive neutrino
    # (a known trap): Om0 + 0.06 eV / (93.14 eV h^2) recovers it.
    cosmo = background.get_cosmology()
    h = cosmo.H0.value / 100
    assert abs(cosmo.Om0 + 0.06 / (93.14 * h**2) - 0.3111) < 0.0056
    assert abs(cosmo.Ode0 - 0.6889) < 0.0056


def test_wright_calculator_example():
    # Wright 2006, PASP 118, 1711, default example (H0 69.6, Omega_M 0.286, Omega_vac 0.714, z = 3)
    # [transcribed]; the calculator includes radiation, reproduced by this parameter set.
    cosmo = background.get_cosmology({"model": "LambdaCDM", "H0": 69.6, "Om0": 0.286, "Ode0": 0.714,
                                      "Tcmb0": 2.72528, "Neff": 3.0})
    assert background.age_gyr(cosmo, 0.0) == pytest.approx(13.721, rel=1e-4)
    assert background.age_gyr(cosmo, 3.0) == pytest.approx(2.171, rel=1e-3)
    assert background.lookback_gyr(cosmo, 3.0) == pytest.approx(11.549, rel=1e-4)
    assert background.comoving_distance_mpc(cosmo, 3.0) == pytest.approx(6481.3, rel=1e-4)
    assert background.angular_diameter_distance_mpc(cosmo, 3.0) == pytest.approx(1620.3, rel=1e-4)
    assert background.luminosity_distance_mpc(cosmo, 3.0) == pytest.approx(25924.3, rel=1e-4)


def test_astropy_quoted_calculator_values():
    # Wright calculator as quoted in astropy's tests: FlatLambdaCDM(70, 0.27, Tcmb0=0), z = 1 [transcribed]
    cosmo = background.get_cosmology({"H0": 70, "Om0": 0.27, "Tcmb0": 0.0})
    assert background.comoving_distance_mpc(cosmo, 1.0) == pytest.approx(3364.5, rel=1e-3)
    assert background.angular_diameter_distance_mpc(cosmo, 1.0) == pytest.approx(1682.3, rel=1e-3)
    assert background.luminosity_distance_mpc(cosmo, 1.0) == pytest.approx(6729.2, rel=1e-3)
    assert background.lookback_gyr(cosmo, 1.0) == pytest.approx(7.841, rel=1e-3)


def test_einstein_de_sitter_closed_forms():
    # Hogg 1999 (astro-ph/9905116): EdS age (2/3)/H0 = 9.312307 Gyr for H0 = 70;
    # D_C = 2 D_H (1 - (1+z)^-1/2); D_A peaks at z = 1.25 with D_A = (8/27) D_H.
    cosmo = background.get_cosmology({"model": "LambdaCDM", "H0": 70, "Om0": 1.0, "Ode0": 0.0, "Tcmb0": 0})
    assert background.age_gyr(cosmo, 0.0) == pytest.approx(9.312307, rel=1e-6)
    z = np.array([0.5, 1.0, 3.0])
    assert background.comoving_distance_mpc(cosmo, z) == pytest.approx(2 * D_H70 * (1 - (1 + z) ** -0.5), rel=1e-8)
    grid = np.linspace(0.5, 2.5, 2001)
    d_a = background.angular_diameter_distance_mpc(cosmo, grid)
    assert grid[np.argmax(d_a)] == pytest.approx(1.25, abs=2e-3)
    assert d_a.max() == pytest.approx(8 / 27 * D_H70, rel=1e-6)


def test_milne_and_de_sitter_closed_forms():
    # Hogg 1999: Milne (empty) D_L = D_H z (1 + z/2); de Sitter D_C = D_H z.
    z = np.array([0.1, 1.0, 2.0])
    milne = background.get_cosmology({"model": "LambdaCDM", "H0": 70, "Om0": 0.0, "Ode0": 0.0, "Tcmb0": 0})
    assert background.luminosity_distance_mpc(milne, z) == pytest.approx(D_H70 * z * (1 + z / 2), rel=1e-8)
    de_sitter = background.get_cosmology({"model": "LambdaCDM", "H0": 70, "Om0": 0.0, "Ode0": 1.0, "Tcmb0": 0})
    assert background.comoving_distance_mpc(de_sitter, z) == pytest.approx(D_H70 * z, rel=1e-8)


def test_flat_lambda_age_closed_form():
    # Flat matter + Lambda (textbook; Hogg 1999 integrals):
    # t(z) = 2 / (3 H0 sqrt(OL)) asinh(sqrt(OL/Om) (1+z)^-3/2)
    om, ol, h0 = 0.3, 0.7, 70.0
    cosmo = background.get_cosmology({"H0": h0, "Om0": om, "Tcmb0": 0})
    hubble_time_gyr = 977.792221 / h0  # 1/H0 in Gyr (977.8/H0 [km/s/Mpc], common practice)
    z = np.array([0.0, 1.0, 5.0])
    expected = 2 / (3 * np.sqrt(ol)) * np.arcsinh(np.sqrt(ol / om) * (1 + z) ** -1.5) * hubble_time_gyr
    assert background.age_gyr(cosmo, z) == pytest.approx(expected, rel=1e-6)


def test_scale_factor_and_age_inverse():
    cosmo = background.get_cosmology()
    assert background.scale_factor([0.0, 1.0, 3.0]) == pytest.approx([1.0, 0.5, 0.25])
    z = background.redshift_at_age(cosmo, 5.0)
    assert background.age_gyr(cosmo, z) == pytest.approx(5.0, rel=1e-5)
    zs = background.redshift_at_age(cosmo, [3.0, 8.0])
    assert background.age_gyr(cosmo, zs) == pytest.approx([3.0, 8.0], rel=1e-3)


def test_w0wa_from_parameters():
    cosmo = background.get_cosmology({"H0": 70, "Om0": 0.3, "Ode0": 0.7, "w0": -0.9, "wa": 0.1})
    assert type(cosmo).__name__ == "w0waCDM"
    assert background.describe(cosmo)["w0"] == -0.9


def test_unknown_realisation_lists_valid_names():
    with pytest.raises(ConfigError, match=r"unknown realisation 'Planck99'; expected one of .*Planck18"):
        background.get_cosmology("Planck99")


def test_bad_parametric_cosmologies():
    with pytest.raises(ConfigError, match="model LambdaCDM needs Ode0"):
        background.get_cosmology({"model": "LambdaCDM", "H0": 70, "Om0": 0.3})
    with pytest.raises(ConfigError, match=r"unknown parameter\(s\) \['Omega'\]"):
        background.get_cosmology({"H0": 70, "Om0": 0.3, "Omega": 1})
    with pytest.raises(ConfigError, match="unknown model 'Bogus'"):
        background.get_cosmology({"model": "Bogus", "H0": 70})
    with pytest.raises(ConfigError, match="'name' cannot be combined"):
        background.get_cosmology({"name": "Planck18", "H0": 70})


def test_child_seeds_depend_on_parent_and_indices():
    import numpy as np

    from cosmogrow.seeding import child_seed

    parent = np.random.SeedSequence(5).spawn(2)
    draws = {(p, i): np.random.default_rng(child_seed(parent[p], i)).random() for p in (0, 1) for i in (0, 1)}
    assert len(set(draws.values())) == 4
    assert np.random.default_rng(child_seed(7, 3, 1)).random() == np.random.default_rng(child_seed(7, 3, 1)).random()


def test_realisations_table_matches_astropy():
    # a named cosmology is described without importing astropy (background.REALISATIONS); every
    # entry must say exactly what astropy's own object says
    from cosmogrow.background import REALISATIONS, DeferredCosmology, available_realisations, describe

    assert set(REALISATIONS) <= set(available_realisations())
    for name in REALISATIONS:
        deferred = DeferredCosmology(name)
        assert describe(deferred) == describe(get_cosmology(name)), name
        assert deferred._built is None  # describing did not build it


def test_deferred_cosmology_builds_on_first_distance_and_pickles_by_name():
    import pickle

    from cosmogrow.background import DeferredCosmology, luminosity_distance_mpc

    deferred = get_cosmology("Planck18", deferred=True)
    assert isinstance(deferred, DeferredCosmology)
    again = pickle.loads(pickle.dumps(deferred))
    assert again._built is None and again.realisation == "Planck18"
    z = np.array([0.1, 1.0])
    assert np.array_equal(luminosity_distance_mpc(deferred, z), luminosity_distance_mpc(get_cosmology("Planck18"), z))
    assert deferred._built is not None and deferred.H0 == get_cosmology("Planck18").H0
    # names outside the table and parametric tables are built at once (and validated by astropy)
    assert not isinstance(get_cosmology({"H0": 70, "Om0": 0.3}, deferred=True), DeferredCosmology)
    with pytest.raises(ConfigError, match="unknown realisation"):
        get_cosmology("Planck99", deferred=True)


def test_a_fit_without_selection_does_not_import_astropy_cosmology(tmp_path):
    # the whole fit command (text catalogues, no selection): astropy.cosmology's import costs ~1 s
    import subprocess
    import sys
    from pathlib import Path

    sys.path.insert(0, str(Path(__file__).parent))
    from mocks import mock_catalog, write_samples

    cat = mock_catalog(np.random.default_rng(3), 1.0, samples=((0.02, 30, "dynamical"), (1.0, 30, "dynamical")))
    paths = write_samples(cat, tmp_path, ("a.csv", "b.csv"))
    code = ("import sys\nfrom cosmogrow.cli.dispatch import main\n"
            f"status = main(['fit', {str(paths[0])!r}, {str(paths[1])!r}, '--out', {str(tmp_path / 'out')!r}, "
            "'--quiet', '--config', " + repr(str(tmp_path / "run.toml")) + "])\n"
            "print('astropy.cosmology' in sys.modules, status)")
    (tmp_path / "run.toml").write_text("seed = 1\n[sampler]\nmax_steps = 400\n")
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=tmp_path)
    assert result.stdout.split()[-2:] == ["False", "0"] or result.stdout.split()[-2:] == ["False", "3"], \
        result.stdout + result.stderr
    summary = (tmp_path / "out" / "summary.json").read_text()
    assert '"Planck18"' in summary
