"""The sensitivity rows and verdicts against full MCMC refits on seeded designs
(docs/method.md#verdicts). Slow: each case runs emcee chains."""

import numpy as np
import pytest

from cosmogrow.inference.laplace import laplace, start_walkers
from cosmogrow.inference.mcmc import run_ensemble
from cosmogrow.inference.sensitivity import ConstrainedLikelihood, profile_significances, sensitivity_rows
from cosmogrow.inference.verdicts import classify
from cosmogrow.model.likelihood import CoupledGrowthModel

from mocks import mock_catalog
from test_significance import CONFOUNDED, PARTIAL, WIDTH, make_model

pytestmark = pytest.mark.slow
# The sensitivity rows must reproduce full refits to this tolerance in k (median and 68 % ends).
TOLERANCE_K = 0.05


def mcmc_k(model, seed, autocorr_factor=100):
    """Posterior draws of k from a full emcee run of `model` (64 walkers, 100 autocorrelation times)."""
    approx = laplace(model)
    rng = np.random.default_rng(seed)
    chain = run_ensemble(model.log_prob, start_walkers(model, approx, 64, rng), max_steps=40000,
                         autocorr_factor=autocorr_factor, seed=seed)
    assert chain.converged
    return chain.samples[:, model.index_k]


def summary_of(k):
    low, median, high = np.percentile(k, [16, 50, 84])
    return np.array([median, low, high])


@pytest.mark.parametrize("samples, z_spread, seed", [(PARTIAL, 0.1, 21), (CONFOUNDED, 0.13, 22)])
def test_reweighted_rows_reproduce_full_refits(samples, z_spread, seed):
    rng = np.random.default_rng(seed)
    catalog = mock_catalog(rng, 0.0, samples=samples, offsets={"virial": 0.45}, z_spread=z_spread)
    model = make_model(catalog)
    approx = laplace(model)
    k_draws = mcmc_k(model, seed)
    rows = sensitivity_rows(model, approx, k_draws, [0.0, 3.0], n_draws=20000, seed=seed)
    for row in rows[:3]:
        refit = make_model(catalog, width=WIDTH * row["value"])
        expected = summary_of(mcmc_k(refit, seed + 1))
        got = np.array([row["k_median"], *row["k_interval68"]])
        assert np.all(np.abs(got - expected) <= TOLERANCE_K), (row["label"], got, expected)


@pytest.mark.parametrize("seed, k_true", [(31, 0.5), (32, 0.9), (33, 1.2), (34, 1.9), (35, 2.3), (36, 3.0)])
def test_one_method_verdicts_agree_with_the_mcmc_posterior(seed, k_true):
    # One method: no offset, so the verdict is the data's alone. Against the full MCMC posterior
    # (σ_post = |mean - k_ref| / std, its posterior in k being Gaussian for this linear model):
    # the verdict words agree whenever both are more than 0.2 σ from the threshold, and within 4 σ
    # the two significances agree to 0.25 σ. (Further out the likelihood ratio grows more slowly
    # than the posterior distance, because the fitted scatter absorbs part of the misfit; that
    # changes no verdict at 3 σ.) σ(k) ≈ 0.3 here, so the truths put k = 0 or 3 near 3 σ.
    rng = np.random.default_rng(seed)
    catalog = mock_catalog(rng, k_true, samples=((0.02, 30, "dynamical"), (1.0, 30, "dynamical")))
    model = make_model(catalog)
    k = mcmc_k(model, seed, autocorr_factor=50)
    _, sigmas = profile_significances(ConstrainedLikelihood(model), [0.0, 3.0], laplace(model).theta)
    for k_ref in (0.0, 3.0):
        posterior = abs(np.mean(k) - k_ref) / np.std(k)
        profile = sigmas[f"{k_ref:g}"]
        if posterior < 4.0:
            assert profile == pytest.approx(posterior, abs=0.25), (k_ref, profile, posterior)
        if abs(profile - 3.0) > 0.2 and abs(posterior - 3.0) > 0.2:
            assert classify([profile]) == classify([posterior]), (k_ref, profile, posterior)


def test_uniform_k_prior_halved_matches_a_refit_bayes_factor():
    # B01 with the k prior halved, from the rescaling of the configured chain, against B01 of a
    # full refit with that prior (Savage-Dickey, Dickey 1971): within 15 % (KDE and chain noise).
    rng = np.random.default_rng(41)
    catalog = mock_catalog(rng, 0.3, samples=((0.02, 25, "dynamical"), (1.0, 25, "dynamical")))
    model = make_model(catalog)
    rows = sensitivity_rows(model, laplace(model), mcmc_k(model, 41), [0.0, 3.0], seed=1)
    narrow = CoupledGrowthModel(model.design, model.options, priors={"k": (-5.0, 5.0)})
    from cosmogrow.inference.summary import savage_dickey
    refit = savage_dickey(mcmc_k(narrow, 42), (-5.0, 5.0))["value"]
    halved = next(row for row in rows if row["setting"] == "k_prior_range" and row["k_prior_width"] == 10)
    assert halved["bayes_factor_k0"] == pytest.approx(refit, rel=0.15)
