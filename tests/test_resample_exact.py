"""Resample-hosts draws of rows with tiny acceptance: exact truncated draws agree with rejection."""

import numpy as np
import pytest
from scipy import stats

import cosmogrow.simulation.population as sim
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
