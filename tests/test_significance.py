"""Significances, sensitivity rows, verdicts on seeded designs, information shares and the
identifiability guards (docs/method.md#verdicts). Fast tests; the MCMC comparisons are in
test_verdict_recovery.py."""

import numpy as np
import pytest
from scipy import optimize, stats

from cosmogrow.config import ModelOptions
from cosmogrow.data.catalog import Catalog
from cosmogrow.errors import ConfigError
from cosmogrow.inference.guards import identifiability, undeclared_methods_warning
from cosmogrow.inference.information import describe_information, information_sentence
from cosmogrow.inference.laplace import laplace
from cosmogrow.inference.sensitivity import (ConstrainedLikelihood, profile_significances,
                                             sensitivity_rows, significance_block)
from cosmogrow.inference.verdicts import DEPENDS, EXCLUDED, verdict_options, verdicts_from_rows
from cosmogrow.model.likelihood import CoupledGrowthModel, build_design

from mocks import mock_catalog

WIDTH = 0.3
# Truth k = 0; the distant sample uses another method with a +0.45 dex calibration offset.
CONFOUNDED = ((0.02, 80, "dynamical"), (1.5, 100, "virial"))
# A local sample with the distant method breaks the degeneracy.
PARTIAL = ((0.02, 60, "dynamical"), (0.05, 50, "virial"), (1.0, 70, "virial"))


def make_model(catalog, width=WIDTH, **options):
    opts = ModelOptions(zero_point_method="dynamical", method_offset_width=width, **options)
    return CoupledGrowthModel(build_design(catalog, opts), opts)


def independent_sigma(model, k_ref, width):
    """σ of the profile ratio from a likelihood written here with scipy.stats and maximised with
    scipy.optimize (ratio form, one offset): constrained by N(0, width), or free when width is None."""
    d = model.design
    virial = (d.method_index == 1).astype(float)

    def negative(params, k):
        alpha, log_sigma, delta = params
        var = np.exp(2 * log_sigma) + d.m_err**2 + d.s_err**2
        mu = alpha + d.s_centred - k * d.x + delta * virial
        value = stats.norm.logpdf(d.m_obs, mu, np.sqrt(var)).sum()
        if width is not None:
            value += stats.norm.logpdf(delta, 0.0, width)
        return -value

    def best(k=None):
        fun = (lambda p: negative(p[:3], p[3])) if k is None else (lambda p: negative(p, k))
        start = [8.5, np.log(0.3), 0.0] + ([0.0] if k is None else [])
        result = optimize.minimize(fun, start, method="Nelder-Mead",
                                   options={"xatol": 1e-9, "fatol": 1e-11, "maxiter": 40000})
        result = optimize.minimize(fun, result.x, method="BFGS", options={"gtol": 1e-8})
        return -result.fun

    return np.sqrt(max(2 * (best() - best(k_ref)), 0.0))


@pytest.mark.parametrize("samples", [PARTIAL, CONFOUNDED])
def test_both_significances_match_an_independent_profile(samples):
    catalog = mock_catalog(np.random.default_rng(11), 0.5, samples=samples, offsets={"virial": 0.3})
    model = make_model(catalog, host_errors="first_order")
    approx = laplace(model)
    for scale, width in ((1.0, WIDTH), (None, None)):
        _, sigmas = profile_significances(ConstrainedLikelihood(model, scale), [0.0, 3.0], approx.theta)
        for k_ref in (0.0, 3.0):
            expected = independent_sigma(model, k_ref, width)
            # tolerance: optimiser precision of both sides (finite-difference gradients here)
            assert sigmas[f"{k_ref:g}"] == pytest.approx(expected, abs=1e-3), (scale, k_ref)


def test_uniform_ranges_never_enter_the_significance():
    catalog = mock_catalog(np.random.default_rng(3), 1.0, samples=PARTIAL)
    wide = make_model(catalog)
    narrow = CoupledGrowthModel(wide.design, wide.options, priors={"k": (-1.0, 2.5)})
    values = [profile_significances(ConstrainedLikelihood(m), [3.0], laplace(m).theta)[1]["3"]
              for m in (wide, narrow)]
    assert values[0] == pytest.approx(values[1], abs=1e-3)


def confounded_rows(seed, z_spread=0.03):
    """Sensitivity rows of a seeded confounded design (truth k = 0, offset +0.45 dex); the
    configured row's posterior draws come from the Laplace approximation (speed)."""
    rng = np.random.default_rng(seed)
    catalog = mock_catalog(rng, 0.0, samples=CONFOUNDED, offsets={"virial": 0.45}, z_spread=z_spread)
    model = make_model(catalog)
    approx = laplace(model)
    k_draws = rng.multivariate_normal(approx.theta, approx.covariance, 2000)[:, 0]
    return model, sensitivity_rows(model, approx, k_draws, [0.0, 3.0], n_draws=800, seed=seed)


@pytest.mark.parametrize("seed", range(4))
def test_confounded_design_verdict_on_k3_depends_on_assumptions(seed):
    model, rows = confounded_rows(seed)
    verdicts = verdicts_from_rows(rows, [0.0, 3.0], 3.0, WIDTH, "the mass-method offsets")
    k3 = verdicts[1]
    assert k3["verdict"] == DEPENDS
    assert k3["sigma_range"][0] < 3.0 <= k3["sigma_range"][1]
    assert "or tighter" in k3["reason"] and "dex" in k3["reason"]
    # the data alone cannot tell k = 3 from k = 0 on this design
    assert k3["sigma_unconstrained"] < 3.0 and "do not exclude" in k3["data_alone"]
    block = significance_block(rows, model)
    assert block["significance_method"] == "profile likelihood, offsets constrained by N(0, 0.3 dex)"
    assert "unconstrained" in block["significance_method_unconstrained"]


def test_sensitivity_rows_have_the_documented_keys_and_settings():
    _, rows = confounded_rows(0)
    keys = {"setting", "value", "k_median", "k_interval68", "sigma_vs_k0", "sigma_vs_k3",
            "bayes_factor_k0"}
    assert all(keys <= set(row) for row in rows)
    assert [row["setting"] for row in rows] == ["offset_width_scale"] * 3 + [
        "offsets_unconstrained", "k_prior_range", "k_prior_range"]
    assert [row["value"] for row in rows[:3]] == pytest.approx([1 / 3, 1, 3])
    halved, doubled = rows[4], rows[5]
    assert halved["k_prior_width"] == 10 and doubled["k_prior_width"] == 40
    # B01 of a uniform prior grows with its width (Savage-Dickey, Dickey 1971)
    assert halved["bayes_factor_k0"] < rows[1]["bayes_factor_k0"] < doubled["bayes_factor_k0"]


def test_one_method_gives_one_row_decided_by_the_data():
    catalog = mock_catalog(np.random.default_rng(5), 0.0, samples=((0.02, 60, "dynamical"),
                                                                     (1.0, 60, "dynamical")))
    model = make_model(catalog)
    approx = laplace(model)
    draws = np.random.default_rng(1).normal(approx.theta[0], approx.std[0], 2000)
    rows = sensitivity_rows(model, approx, draws, [0.0, 3.0], seed=1)
    assert [row["setting"] for row in rows] == ["as_configured", "k_prior_range", "k_prior_range"]
    verdicts = verdicts_from_rows(rows, [0.0, 3.0])
    assert verdicts[1]["verdict"] == EXCLUDED and verdicts[1]["sigma_range"][0] == verdicts[1]["sigma"]
    assert "no offset parameter" in verdicts[1]["reason"]


def test_information_matches_weighted_least_squares_for_one_method():
    # One method, no selection, ratio form: after profiling alpha the information on k is
    # sum_i w_i (x_i - xbar_w)^2, w_i = 1/(sigma_int^2 + e_m^2 + e_s^2) (weighted least squares,
    # common practice); sigma_int is nearly orthogonal to k.
    catalog = mock_catalog(np.random.default_rng(2), 1.0, samples=((0.02, 80, "dynamical"),
                                                                     (1.2, 80, "dynamical")))
    model = make_model(catalog, host_errors="first_order")
    approx = laplace(model)
    d = model.design
    weights = 1.0 / (approx.theta[2] ** 2 + d.m_err**2 + d.s_err**2)
    xbar = np.sum(weights * d.x) / weights.sum()
    expected = np.sum(weights * (d.x - xbar) ** 2) ** -0.5
    block = describe_information(model, approx, catalog)
    assert block["sigma_k"] == pytest.approx(expected, rel=0.02)
    # two samples at two redshifts: each is needed, neither constrains k alone
    for row in block["per_sample"].values():
        assert row["loss_if_removed"] > 0.95 and row["alone"] < 0.05
    assert "comparison between samples 'S0' and 'S1'" in block["text"]
    assert block["per_source"] is None


def test_information_names_a_sample_that_carries_k_alone_and_splits_by_source():
    rng = np.random.default_rng(4)
    wide = mock_catalog(rng, 1.0, samples=((1.0, 150, "dynamical"),), z_spread=0.95)
    small = mock_catalog(rng, 1.0, samples=((0.5, 15, "dynamical"),), z_spread=0.1)
    parts = [Catalog.from_columns(z=c.z, log_mbh=c.log_mbh, log_mbh_err=c.log_mbh_err,
                                  log_mstar=c.log_mstar, log_mstar_err=c.log_mstar_err,
                                  sample=name, method="dynamical", source=source,
                                  ids=[f"{name}{i}" for i in range(len(c))])
             for c, name, source in ((wide, "wide", "atlas"), (small, "small", "notes"))]
    catalog = Catalog.concat(parts)
    model = make_model(catalog)
    block = describe_information(model, laplace(model), catalog)
    assert block["per_sample"]["wide"]["alone"] > 0.8
    assert "inside sample 'wide' alone" in block["text"]
    assert set(block["per_source"]) == {"atlas", "notes"}


def test_information_sentence_for_no_dominant_group():
    shares = {name: {"alone": 0.2, "loss_if_removed": 0.3} for name in "abc"}
    assert information_sentence(shares).startswith("No single sample carries")


def test_identifiability_guards():
    rng = np.random.default_rng(0)
    good = identifiability(rng.normal(1.0, 0.3, 4000), (-10, 10), rng.uniform(0, 2, 50))
    assert good == {"identified": True, "reasons": []}
    flat = identifiability(rng.uniform(-10, 10, 4000), (-10, 10), rng.uniform(0, 2, 50))
    assert not flat["identified"] and "fills" in flat["reasons"][0]
    edge = identifiability(10 - np.abs(rng.normal(0, 0.3, 4000)), (-10, 10), rng.uniform(0, 2, 50))
    assert not edge["identified"] and "prior edge k = 10" in " ".join(edge["reasons"])
    one_z = identifiability(rng.normal(0, 0.1, 4000), (-10, 10), np.full(30, 0.7))
    assert not one_z["identified"] and "one redshift" in one_z["reasons"][0]


def test_undeclared_methods_across_redshifts_are_warned_about():
    catalog = mock_catalog(np.random.default_rng(0), 0.0, samples=((0.02, 20, "unspecified"),
                                                                     (1.0, 20, "unspecified")))
    text = undeclared_methods_warning(catalog)
    assert text and "absorbed into k" in text and "host-type" in text
    declared = mock_catalog(np.random.default_rng(0), 0.0)
    assert undeclared_methods_warning(declared) is None


def test_verdict_options_validate_and_merge_claims():
    assert verdict_options({"claims": [1.5]}, claims=[2.0, 1.5]) == {"threshold": 3.0,
                                                                      "k_refs": [0.0, 3.0, 1.5, 2.0]}
    assert verdict_options({"threshold": 5}, threshold=2.0)["threshold"] == 2.0
    with pytest.raises(ConfigError, match=r"run.toml: verdicts.threshold: expected .* got -1"):
        verdict_options({"threshold": -1}, "run.toml")
    with pytest.raises(ConfigError, match=r"unknown key 'verdicts.sigma'"):
        verdict_options({"sigma": 3}, "run.toml")
    with pytest.raises(ConfigError, match=r"verdicts.claims: expected finite numbers, got 'x'"):
        verdict_options({"claims": ["x"]}, "run.toml")


def test_host_type_offsets_enter_constraints_labels_and_information():
    # Truth k = 0; local quiescent hosts, distant AGN hosts 0.6 dex lower in M_BH/M* (inside the
    # 0.5-1 dex of Reines & Volonteri 2015, ApJ 813, 82), one mass method: the host-type offset is
    # confounded with redshift, so the k = 3 verdict depends on its constraint.
    rng = np.random.default_rng(9)
    cat = mock_catalog(rng, 0.0, samples=((0.02, 80, "dynamical"), (1.5, 100, "dynamical")), z_spread=0.03)
    types = np.where(cat.sample == "S0", "quiescent", "agn").astype(object)
    cat = cat.replace(host_type=types, log_mbh=cat.log_mbh - 0.6 * (types == "agn"))
    opts = ModelOptions(zero_point_host_type="quiescent", host_offset_width=0.5)
    model = CoupledGrowthModel(build_design(cat, opts), opts)
    assert model.names[-1] == "delta_host[agn]"
    approx = laplace(model)
    k_draws = rng.multivariate_normal(approx.theta, approx.covariance, 2000)[:, 0]
    rows = sensitivity_rows(model, approx, k_draws, [0.0, 3.0], n_draws=800, seed=1)
    assert rows[0]["label"] == "offsets constrained by N(0, 0.17 dex)"
    verdicts = verdicts_from_rows(rows, [0.0, 3.0], 3.0, 0.5, "the host-type offsets")
    assert verdicts[1]["verdict"] == DEPENDS and "host-type offsets" in verdicts[1]["reason"]
    block = describe_information(model, approx, cat)
    assert set(block["per_host_type"]) == {"quiescent", "agn"}
    # each host type lives at one redshift only: neither constrains k alone
    assert all(row["alone"] < 0.2 for row in block["per_host_type"].values())


def test_labels_name_each_kind_when_widths_differ():
    from cosmogrow.inference.sensitivity import offset_label, offset_subject
    cat = mock_catalog(np.random.default_rng(1), 0.0, samples=PARTIAL)
    cat = cat.replace(host_type=np.where(cat.sample == "S2", "agn", "quiescent").astype(object))
    model = make_model(cat, zero_point_host_type="quiescent", host_offset_width=1.0)
    assert offset_label(model) == ("offsets constrained by N(0, 0.3 dex) for mass methods and "
                                   "N(0, 1 dex) for host types")
    assert offset_label(model, 3.0).endswith("N(0, 3 dex) for host types")
    assert offset_subject(model) == "the mass-method and host-type offsets"
