"""Resample-hosts draws of rows with tiny acceptance: exact truncated draws agree with rejection."""

import numpy as np
import pytest
from scipy import stats

import cosmogrow.simulation.resample as sim
from cosmogrow.background import get_cosmology
from cosmogrow.data.catalog import Catalog

COSMO = get_cosmology("Planck18")


def design(n, z=1.0):
    return Catalog.from_columns(z=np.full(n, z), log_mbh=np.full(n, 8.0), log_mbh_err=np.full(n, 0.3),
                                log_mstar=np.full(n, 11.0), log_mstar_err=np.full(n, 0.1),
                                sample="far", method="virial")


@pytest.mark.parametrize("selection", [
    {"kind": "mass_cut", "log_mbh_min": 8.3, "on": "observed", "width": 0.1},
    {"kind": "mass_cut", "log_mbh_min": 8.3, "on": "intrinsic", "width": 0.2},
    {"kind": "flux_limit", "flux_limit": 3e-14, "bolometric_correction": 10.0},
])
def test_exact_draws_match_rejection(selection, monkeypatch):
    catalog = design(20000)
    truth = {"k": 0.0, "alpha": 8.0, "sigma_int": 0.3}
    monkeypatch.setattr(sim, "_EXACT_AFTER_ROUNDS", 10**6)  # rejection only
    rejected = sim.resample_hosts(catalog, truth, {"far": [selection]}, COSMO, seed=1).log_mbh
    monkeypatch.setattr(sim, "_EXACT_AFTER_ROUNDS", 0)  # exact draws only
    exact = sim.resample_hosts(catalog, truth, {"far": [selection]}, COSMO, seed=2).log_mbh
    assert stats.ks_2samp(rejected, exact).pvalue > 1e-3


def test_rows_of_negligible_acceptance_are_drawn():
    # a cut 3 dex above the mean: acceptance ~ 1e-20, hopeless for rejection
    catalog = design(50)
    truth = {"k": 0.0, "alpha": 8.0, "sigma_int": 0.3}
    cut = {"kind": "mass_cut", "log_mbh_min": 11.0, "on": "intrinsic", "width": 0.1}
    out = sim.resample_hosts(catalog, truth, {"far": [cut]}, COSMO, seed=3)
    # u = m - 0.1 eps is truncated at 11 (mean 8, sd sqrt(0.09 + 0.01)): E[u] = 11.01, and
    # E[m | u] = 8 + 0.9 (u - 8) = 10.71; observed masses add 0.3 dex errors (50 rows: sd 0.04)
    assert out.log_mbh.mean() == pytest.approx(10.71, abs=0.15)
    assert np.all(out.log_mbh > 9.5)


@pytest.mark.parametrize("on", ["observed", "intrinsic"])
def test_redrawn_hosts_exact_draws_match_rejection(on, monkeypatch):
    # a selected sample whose parent hosts the fit estimates: host and mass are redrawn together
    # (docs/method.md#simulator); the exact path draws s | y from the joint Gaussian, the rejection
    # path proposes (s, m) pairs; both are draws of p(m_obs, s_obs | S, z)
    catalog = design(20000)
    truth = {"k": 0.0, "alpha": 8.0, "sigma_int": 0.3, "host_priors": {"far": [10.8, 0.09]}}
    cut = {"kind": "mass_cut", "log_mbh_min": 8.3, "on": on, "width": 0.1}
    monkeypatch.setattr(sim, "_EXACT_AFTER_ROUNDS", 10**6)
    rejected = sim.resample_hosts(catalog, truth, {"far": [cut]}, COSMO, seed=1)
    monkeypatch.setattr(sim, "_EXACT_AFTER_ROUNDS", 0)
    exact = sim.resample_hosts(catalog, truth, {"far": [cut]}, COSMO, seed=2)
    for column in ("log_mbh", "log_mstar"):
        assert stats.ks_2samp(getattr(rejected, column), getattr(exact, column)).pvalue > 1e-3
    assert abs(np.corrcoef(rejected.log_mbh, rejected.log_mstar)[0, 1]
               - np.corrcoef(exact.log_mbh, exact.log_mstar)[0, 1]) < 0.03
    # the selection favours massive hosts: the selected hosts sit above the parent mean 10.8 (the
    # parent's 0.3 dex spread and the 0.1 dex errors give 0.32 dex observed; 20000 rows: sd 0.002)
    assert exact.log_mstar.mean() > 10.85
    assert np.all(catalog.log_mstar == 11.0)  # the input is not modified


def test_hosts_are_kept_outside_samples_with_a_parent_prior():
    catalog = Catalog.concat([design(200), design(200, z=0.02).replace(
        sample=np.full(200, "near"), ids=np.char.add("n", np.arange(200).astype(str)))])
    truth = {"k": 0.0, "alpha": 8.0, "sigma_int": 0.3, "host_priors": {"far": [10.8, 0.09]}}
    out = sim.resample_hosts(catalog, truth, {"far": [{"kind": "mass_cut", "log_mbh_min": 7.5}]}, COSMO, seed=4)
    near = out.sample == "near"
    assert np.all(out.log_mstar[near] == 11.0) and np.std(out.log_mstar[~near]) > 0.2
    first_order = sim.resample_hosts(catalog, truth, {"far": [{"kind": "mass_cut", "log_mbh_min": 7.5}]},
                                     COSMO, seed=4, host_errors="first_order")
    assert np.all(first_order.log_mstar == 11.0)  # only the calibrated fit estimates a parent prior


def test_black_hole_mass_thresholds_do_not_depend_on_the_host():
    # redrawn hosts reuse each row's compiled black-hole-mass thresholds (they depend on z only)
    from cosmogrow.selection.physics import build_selection
    for spec in ({"kind": "mass_cut", "log_mbh_min": 8.0}, {"kind": "flux_limit", "flux_limit": 1e-13},
                 {"kind": "sphere_of_influence"}):
        (model,) = build_selection(spec)
        z = np.array([0.01, 0.5, 1.0])
        low = model.threshold(z, np.full(3, 10.0), COSMO)
        high = model.threshold(z, np.full(3, 12.0), COSMO)
        assert np.allclose(low[0], high[0]) and np.allclose(low[1], high[1])
