"""The stellar-remnant test: birth masses under coupled growth against the neutron-star limit."""

import json

import numpy as np
import pytest
from astropy.cosmology import Planck18
from astropy.table import Table

from cosmogrow import background
from cosmogrow.cli import dispatch as cli
from cosmogrow.consequences import remnants
from cosmogrow.errors import ConfigError, InputError

# Standard-normal table values (common practice): Φ(0.6), Φ(3.6), and the 95 % quantile.
PHI_0P6 = 0.7257469
PHI_3P6 = 0.9998409
Z_95 = 1.6448536


def make_catalog(mass, mass_err, z_obs, z_form):
    n = len(mass)
    return remnants.RemnantCatalog(
        ids=np.array([f"bh{i}" for i in range(n)], dtype=object), mass=np.array(mass, float),
        mass_err=np.array(mass_err, float), z_obs=np.array(z_obs, float), z_form=np.array(z_form, float),
        age_gyr=np.full(n, np.nan), formation_from=np.array(["z_form"] * n, dtype=object))


def write_csv(path, text):
    path.write_text(text)
    return path


def test_birth_masses_by_hand():
    # 8 Msun formed at z = 1, seen today, k = 3: 8 × (1/2)^3 = 1 Msun.
    # 10 Msun formed at z = 2, seen at z = 0.5, k = 1: 10 × 1.5/3 = 5 Msun.  k = 0: unchanged.
    births = remnants.birth_mass([8.0, 10.0], [0.0, 0.5], [1.0, 2.0], np.array([3.0, 1.0, 0.0]))
    np.testing.assert_allclose(births, [[1.0, 10 * 0.5**3], [4.0, 5.0], [8.0, 10.0]], rtol=1e-14)


def test_probabilities_and_joint_by_hand():
    # Formed at z = 1, seen today, k = 1: birth mass > 2.2 ⇔ present mass > 2.2 × 2 = 4.4 Msun.
    catalog = make_catalog([8.0, 5.0, 3.0], [1.0, 1.0, 0.0], [0, 0, 0], [1, 1, 1])
    probs = remnants.prob_above_limit(catalog, 1.0, limit=2.2)
    np.testing.assert_allclose(probs, [PHI_3P6, PHI_0P6, 0.0], atol=1e-7)  # Φ(3.6), Φ(0.6), a step
    two = make_catalog([8.0, 5.0], [1.0, 1.0], [0, 0], [1, 1])
    assert remnants.joint_probability(two, 1.0) == pytest.approx(PHI_3P6 * PHI_0P6, abs=1e-7)


def test_k_max_per_object_by_hand():
    # No error: 8 × 2^-k = 2.2 ⇒ k = ln(8/2.2)/ln 2.  With 1 Msun error: (8 - 1.645) × 2^-k = 2.2.
    # Seen at z_obs = 0.5, formed at z = 2: r = 1/2 as well.
    catalog = make_catalog([8.0, 8.0, 8.0, 1.0], [0.0, 1.0, 1.0, 1.0], [0, 0, 0.5, 0], [1, 1, 2, 1])
    k_each = remnants.k_max_per_object(catalog)
    expected = [np.log(8 / 2.2) / np.log(2), np.log((8 - Z_95) / 2.2) / np.log(2),
                np.log((8 - Z_95) / 2.2) / np.log(2), -np.inf]  # 1 ± 1 Msun never reaches 95 %
    np.testing.assert_allclose(k_each, expected, rtol=1e-7)
    one = make_catalog([8.0], [1.0], [0], [1])
    assert remnants.k_max_joint(one) == pytest.approx(expected[1], rel=1e-7)
    assert remnants.joint_probability(one, expected[1]) == pytest.approx(0.95, abs=1e-8)


def test_k_max_joint_is_where_joint_probability_is_95_percent():
    catalog = make_catalog([8.0, 6.0, 12.0], [1.0, 0.8, 2.0], [0, 0.1, 0], [1.0, 0.8, 3.0])
    k_joint = remnants.k_max_joint(catalog)
    assert remnants.joint_probability(catalog, k_joint) == pytest.approx(0.95, abs=1e-9)
    assert k_joint < np.min(remnants.k_max_per_object(catalog))
    ks = np.linspace(-2, 6, 50)
    assert np.all(np.diff(remnants.joint_probability(catalog, ks)) <= 0)  # falls with k
    hopeless = make_catalog([8.0, 1.0], [1.0, 1.0], [0, 0], [1, 1])
    assert remnants.k_max_joint(hopeless) == -np.inf


def test_probability_against_monte_carlo():
    # Gaussian errors in mass: draw true masses, grow them back, count births above the limit.
    rng = np.random.default_rng(11)
    catalog = make_catalog([6.0, 4.0], [1.5, 0.4], [0.0, 0.2], [1.5, 0.9])
    k = 1.2
    draws = rng.normal(catalog.mass, catalog.mass_err, size=(200_000, 2))
    births = draws * catalog.growth_ratio**k
    frequency = np.mean(births > 2.2, axis=0)
    # Binomial standard error <= sqrt(0.25 / 2e5) = 1.1e-3; allow 4 sigma.
    np.testing.assert_allclose(remnants.prob_above_limit(catalog, k), frequency, atol=4.5e-3)
    joint_frequency = np.mean(np.all(births > 2.2, axis=1))
    assert remnants.joint_probability(catalog, k) == pytest.approx(joint_frequency, abs=4.5e-3)


def test_posterior_averages_over_the_chain():
    catalog = make_catalog([8.0, 5.0], [1.0, 1.0], [0, 0], [1, 1])
    constant = remnants.posterior_probabilities(catalog, np.full(10, 1.0))
    np.testing.assert_allclose(constant["p_above_limit"], remnants.prob_above_limit(catalog, 1.0))
    two_point = remnants.posterior_probabilities(catalog, [0.0, 1.0])
    expected = 0.5 * (remnants.joint_probability(catalog, 0.0) + remnants.joint_probability(catalog, 1.0))
    assert two_point["joint_probability"] == pytest.approx(expected)
    np.testing.assert_allclose(two_point["birth_mass_median"], [6.0, 3.75])  # mid of (8, 4), (5, 2.5)


def test_read_csv_with_z_form_and_age(tmp_path):
    # Planck18 age today minus age at z = 1 as the system's age gives back z_form = 1.
    age = float(background.age_gyr(Planck18, 0.0) - background.age_gyr(Planck18, 1.0))
    later = float(background.age_gyr(Planck18, 0.3) - background.age_gyr(Planck18, 2.0))
    text = f"id,mass,mass_err,z_obs,z_form,age_gyr\nA,7.8,1.1,0,1.5,\nB,10,0.5,,,{age}\nC,9,1,0.3,,{later}\n"
    catalog = remnants.read_remnants(write_csv(tmp_path / "c.csv", text), Planck18)
    np.testing.assert_allclose(catalog.z_form, [1.5, 1.0, 2.0], rtol=1e-3)
    assert list(catalog.formation_from) == ["z_form", "age_gyr", "age_gyr"]
    np.testing.assert_array_equal(catalog.z_obs, [0.0, 0.0, 0.3])


def test_read_ecsv(tmp_path):
    table = Table({"id": ["x", "y"], "mass": [7.0, 9.0], "mass_err": [0.5, 1.0], "z_form": [1.0, 0.5]})
    path = tmp_path / "cat.ecsv"
    table.write(path, format="ascii.ecsv")
    catalog = remnants.read_remnants(path, Planck18)
    assert list(catalog.ids) == ["x", "y"]
    np.testing.assert_allclose(catalog.growth_ratio, [0.5, 1 / 1.5])


@pytest.mark.parametrize("text, match", [
    ("id,mass_err,z_form\nA,1,1\n", "column 'mass': missing column"),
    ("id,mass,mass_err\nA,5,1\n", "column 'z_form': missing formation epoch"),
    ("id,mass,mass_err,z_form\nA,5,1,1\nB,-3,1,1\n", "row 2, column 'mass', value '-3': expected a value > 0.0"),
    ("id,mass,mass_err,z_form\nA,five,1,1\n", "row 1, column 'mass', value 'five': expected a number"),
    ("id,mass,mass_err,z_form\nA,5,-1,1\n", "row 1, column 'mass_err', value '-1': expected a value >= 0.0"),
    ("id,mass,mass_err,z_obs,z_form\nA,5,1,0.5,0.2\n", "row 1, column 'z_form', value '0.2': expected z_form greater"),
    ("id,mass,mass_err,z_form,age_gyr\nA,5,1,1,3\n", "row 1, column 'z_form': expected exactly one of z_form or age_gyr, got both"),
    ("id,mass,mass_err,z_form,age_gyr\nA,5,1,,\n", "got neither"),
    ("id,mass,mass_err,age_gyr\nA,5,1,20\n", "row 1, column 'age_gyr', value '20': expected an age below"),
    ("id,mass,mass_err,z_form\nA,5,inf,1\n", "row 1, column 'mass_err', value 'inf': expected a finite number"),
    ("id,mass,mass_err,z_form\n", "no data rows"),
])
def test_read_errors_name_file_row_column_value(tmp_path, text, match):
    path = write_csv(tmp_path / "bad.csv", text)
    with pytest.raises(InputError, match=match) as info:
        remnants.read_remnants(path, Planck18)
    assert str(info.value).startswith(str(path))


def test_read_missing_file(tmp_path):
    with pytest.raises(InputError, match="file not found"):
        remnants.read_remnants(tmp_path / "none.csv", Planck18)


def test_limit_and_confidence_errors():
    catalog = make_catalog([8.0], [1.0], [0], [1])
    with pytest.raises(ConfigError, match="limit: expected a positive mass"):
        remnants.prob_above_limit(catalog, 1.0, limit=-1.0)
    with pytest.raises(ConfigError, match=r"confidence: expected a probability in \(0, 1\)"):
        remnants.k_max_joint(catalog, confidence=1.5)


# --- command line ------------------------------------------------------------------------------

@pytest.fixture
def only_physics_commands(monkeypatch):
    """Build the CLI with this issue's commands only (other commands may be work in progress)."""
    monkeypatch.setattr(cli, "COMMANDS", ("budget", "remnants"))


CATALOG = "id,mass,mass_err,z_obs,z_form\nA,8,0,0,1\nB,10,0,0.5,2\n"


def test_cli_remnants_hand_worked(tmp_path, only_physics_commands):
    path = write_csv(tmp_path / "cat.csv", CATALOG)
    out = tmp_path / "out"
    assert cli.main(["remnants", str(path), "--k", "1", "--out", str(out)]) == 0
    report = json.loads((out / "remnants.json").read_text())
    # k = 1: A: 8 × 1/2 = 4; B: 10 × 1.5/3 = 5 (both exact, no errors): both above 2.2 Msun.
    assert [o["birth_mass"] for o in report["objects"]] == pytest.approx([4.0, 5.0])
    assert report["joint_probability"] == 1.0
    # Both r = 1/2: the binding one is A, k_max = ln(8 / 2.2) / ln 2.
    assert report["k_max_95"] == pytest.approx(np.log(8 / 2.2) / np.log(2), rel=1e-8)
    assert (out / "remnants.png").stat().st_size > 10_000


def test_cli_remnants_posterior(tmp_path, only_physics_commands):
    path = write_csv(tmp_path / "cat.csv", CATALOG)
    fit_dir = tmp_path / "fit"
    fit_dir.mkdir()
    np.savez(fit_dir / "samples.npz", k=np.array([1.0, 1.0, 3.0, 3.0]))
    out = tmp_path / "out"
    assert cli.main(["remnants", str(path), "--posterior", str(fit_dir), "--out", str(out)]) == 0
    report = json.loads((out / "remnants.json").read_text())
    assert report["k"] == 2.0 and report["k_is"] == "posterior median"
    # k = 3: A born at 1 Msun (below), B at 1.25 Msun (below); k = 1: both above. Mean joint 0.5.
    assert report["posterior"]["joint_probability_mean"] == pytest.approx(0.5)
    assert [o["posterior"]["p_above_limit"] for o in report["objects"]] == pytest.approx([0.5, 0.5])


@pytest.mark.parametrize("text, extra, match", [
    ("id,mass_err,z_form\nA,1,1\n", ["--k", "1"], "column 'mass': missing column"),
    ("id,mass,mass_err,z_form\nA,-8,1,1\n", ["--k", "1"], "row 1, column 'mass', value '-8'"),
    (CATALOG, [], "expected --k K, --posterior FIT_DIR, or both"),
    (CATALOG, ["--k", "1", "--limit", "0"], "--limit: expected a finite number > 0"),
])
def test_cli_remnants_bad_input_exit_2_one_line_nothing_written(tmp_path, capsys, only_physics_commands,
                                                               text, extra, match):
    path = write_csv(tmp_path / "cat.csv", text)
    out = tmp_path / "out"
    code = cli.main(["remnants", str(path), *extra, "--out", str(out)])
    err = capsys.readouterr().err.strip()
    assert code == 2
    assert len(err.splitlines()) == 1 and err.startswith("cosmogrow remnants: error:")
    assert match in err
    assert not out.exists()
