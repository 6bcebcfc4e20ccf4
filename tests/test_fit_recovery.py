"""k recovery on synthetic data: interval coverage over 200 seeded realisations per case.

Each realisation is fitted the way `cosmogrow fit` does (Laplace start, emcee ensemble) with a
shorter fixed chain: the walkers start from the Laplace approximation, already near the posterior.
Coverage must be within binomial 3 sigma of nominal; a bias would show as under-coverage.
"""

import numpy as np
import pytest

from cosmogrow.config import ModelOptions
from cosmogrow.inference.laplace import laplace, start_walkers
from cosmogrow.model.likelihood import CoupledGrowthModel, build_design
from cosmogrow.inference.mcmc import run_ensemble

from mocks import mock_catalog

N_REAL = 200


def binomial_band(p, n, width=3.0):
    half = width * np.sqrt(p * (1 - p) / n)
    return p - half, p + half


def fit_intervals(catalog, form, seed):
    opts = ModelOptions(form=form)
    model = CoupledGrowthModel(build_design(catalog, opts), opts)
    approx = laplace(model)
    start = start_walkers(model, approx, 16, np.random.default_rng(seed))
    chain = run_ensemble(model.log_prob, start, max_steps=300, autocorr_factor=1e9, check_every=300, seed=seed)
    k = chain.samples[:, 0]
    return np.percentile(k, [2.5, 16, 84, 97.5]), approx


@pytest.mark.slow
@pytest.mark.parametrize("k_true", [0.0, 3.0])
@pytest.mark.parametrize("form", ["ratio", "relation"])
def test_interval_coverage(k_true, form):
    beta = 1.0 if form == "ratio" else 0.8
    hits68 = hits95 = 0
    errors = []
    for r in range(N_REAL):
        rng = np.random.default_rng([11, int(k_true), r, form == "ratio"])
        # equal host distributions in every sample, so regression dilution of beta does not leak into k
        cat = mock_catalog(rng, k_true, beta=beta, s_err=0.05)
        (lo95, lo68, hi68, hi95), approx = fit_intervals(cat, form, seed=r)
        hits68 += lo68 <= k_true <= hi68
        hits95 += lo95 <= k_true <= hi95
        errors.append(approx.theta[0] - k_true)
    print(f"{form} k={k_true}: coverage68 {hits68 / N_REAL:.3f}, coverage95 {hits95 / N_REAL:.3f}, "
          f"mean MAP error {np.mean(errors):+.4f}")
    lo, hi = binomial_band(0.68, N_REAL)
    assert lo <= hits68 / N_REAL <= hi, f"68% coverage {hits68 / N_REAL:.3f}"
    lo, hi = binomial_band(0.95, N_REAL)
    assert lo <= hits95 / N_REAL <= hi, f"95% coverage {hits95 / N_REAL:.3f}"
    errors = np.array(errors)
    # MAP bias within 3 standard errors of zero
    assert abs(errors.mean()) < 3 * errors.std(ddof=1) / np.sqrt(N_REAL)
