"""The forecast width of k against the spread of k over mocks fitted with the fast estimator.

Three plans: plain (three samples, two methods), a hard cut on the observed mass of the distant
sample (selection-aware fit, calibrated host errors), and methods confounded with redshift (local
dynamical, distant virial: k rests partly on the offset prior). Each mock draws its method offsets
from their prior, so the spread of k includes the uncertainty the prior states. 300 mocks give the
standard deviation to ±4 % (1/sqrt(2 × 299)); the tolerance is 15 % (almost 4 standard errors).
"""

import pytest

from cosmogrow.forecast.fisher import expected_information, population
from cosmogrow.forecast.run import check_by_mocks
from cosmogrow.forecast.scans import base_sizes

from forecast_plans import make_plan, sample

MOCKS = 300

PLANS = {
    "plain": dict(samples=[sample("near", 30, (0.01, 0.1), "dynamical"),
                           sample("far", 30, (0.5, 1.5), "reverberation"),
                           sample("farther", 30, (1.0, 2.5), "reverberation")],
                  truth={"k": 0.5}),
    "hard_cut": dict(samples=[sample("near", 40, (0.01, 0.1), "dynamical"),
                              sample("far", 40, (0.8, 1.6), "dynamical", log_mbh_err=0.3,
                                     selection={"kind": "mass_cut", "log_mbh_min": 8.0, "on": "observed"})],
                     truth={"k": 1.0}, model={"host_errors": "calibrated"}),
    "confounded": dict(samples=[sample("near", 40, (0.01, 0.1), "dynamical"),
                                sample("far", 60, (0.5, 2.0), "virial")],
                       truth={"k": 1.0, "delta": {"virial": 0.1}}),
}


@pytest.mark.slow
@pytest.mark.parametrize("name", list(PLANS))
def test_forecast_matches_spread_of_mocks(name):
    plan = make_plan(**PLANS[name], forecast={"mc_objects": 20000})
    extra = [plan.anchor_table] if plan.anchor_table else []
    info = expected_information(plan, population(plan, extra, seed=0))
    sigma_k = info.sigma_k(base_sizes(plan))
    check = check_by_mocks(plan, sigma_k, MOCKS, seed=11)
    assert check["converged"] >= 0.95 * MOCKS
    assert check["std"] == pytest.approx(sigma_k, rel=0.15), (name, sigma_k, check["std"])
