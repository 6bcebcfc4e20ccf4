"""The forecast: Fisher width of k against closed forms, scaling, the k-offset degeneracy, the
command's outputs and its errors."""

import json
import shutil

import numpy as np
import pytest
from scipy import stats

from cosmogrow.cli.dispatch import main
from cosmogrow.data.readers import write_catalog
from cosmogrow.forecast import scans
from cosmogrow.forecast.fisher import exclusion_power, expected_information, population
from cosmogrow.forecast.run import parameter_widths
from cosmogrow.report.forecast_figures import forecast_figure
from cosmogrow.report.forecast_markdown import forecast_markdown
from cosmogrow.forecast.scans import base_sizes
from cosmogrow.report.html import build_report
from cosmogrow.simulation.population import simulate_population

from forecast_plans import closed_form_sigma_k, make_plan, sample

MC = 20000


def information(plan, seed=0, mc_objects=MC):
    extra = [plan.anchor_table] if plan.anchor_table else []
    return expected_information(plan, population(plan, extra, seed=seed, mc_objects=mc_objects))


def test_sigma_k_matches_closed_form_without_selection():
    # One method, no selection, ratio form, first-order host errors: the model's variance is
    # σ_int² + e_m² + e_s² and the Fisher width of k is the weighted lever-arm closed form.
    plan = make_plan([sample("near", 100, (0.01, 0.1), "dynamical"),
                      sample("far", 200, (0.5, 2.0), "dynamical", log_mbh_err=0.3)],
                     forecast={"mc_objects": MC})
    info = information(plan)
    sigma = info.sigma_k(base_sizes(plan))
    expected = closed_form_sigma_k([(100, 0.01, 0.1, 0.1, 0.15), (200, 0.5, 2.0, 0.3, 0.15)], 0.3)
    assert sigma == pytest.approx(expected, rel=0.05)
    # the scatter enters only the variance: F_σσ = Σ ½ (∂V/∂σ / V)² = Σ 2σ²/V² (Gaussian Fisher matrix,
    # Tegmark, Taylor & Heavens 1997, ApJ 480, 22), checking the finite differences beyond the mean
    variances = [0.3**2 + 0.1**2 + 0.15**2, 0.3**2 + 0.3**2 + 0.15**2]
    f_sigma = sum(n * 2 * 0.3**2 / v**2 for n, v in zip((100, 200), variances))
    widths = parameter_widths(info, base_sizes(plan))
    assert widths["sigma_int"] == pytest.approx(f_sigma ** -0.5, rel=0.05)


def test_kept_catalogue_enters_with_its_own_redshifts(tmp_path):
    near = simulate_population({"seed": 3, "truth": {"k": 1.0, "sigma_int": 0.3},
                                "sample": [sample("near", 60, (0.01, 0.1), "dynamical")]}).catalog
    write_catalog(near, tmp_path / "near.csv")
    plan = make_plan([{"name": "near", "path": str(tmp_path / "near.csv")},
                      sample("far", 150, (0.5, 2.0), "dynamical")], forecast={"mc_objects": MC})
    sigma = information(plan).sigma_k(base_sizes(plan))
    # exact sums over the kept rows, expectation over the simulated sample
    w = 1.0 / (0.3**2 + 0.1**2 + 0.15**2)
    x_near = np.log10(1 + near.z)
    from forecast_plans import lever_arm_moments
    mean_far, var_far = lever_arm_moments(0.5, 2.0)
    x_bar = (x_near.sum() + 150 * mean_far) / (60 + 150)
    expected = (w * (np.sum((x_near - x_bar) ** 2) + 150 * (var_far + (mean_far - x_bar) ** 2))) ** -0.5
    assert sigma == pytest.approx(expected, rel=0.05)


def test_plan_of_kept_catalogues_only(tmp_path):
    result = simulate_population({"seed": 4, "truth": {"k": 1.0, "sigma_int": {"near": 0.3, "far": 0.3}},
                                  "sample": [sample("near", 40, (0.01, 0.1), "dynamical"),
                                             sample("far", 40, (1.0, 2.0), "dynamical")]})
    for name in ("near", "far"):
        write_catalog(result.catalog.subset(result.catalog.sample == name), tmp_path / f"{name}.csv")
    plan = tmp_path / "plan.toml"
    plan.write_text('[truth]\nk = 1.0\nsigma_int = { near = 0.3, far = 0.3 }\n[model]\nhost_errors = "first_order"\n'
                    '[forecast]\nmc_objects = 2000\n[[sample]]\nname = "near"\npath = "near.csv"\n'
                    '[[sample]]\nname = "far"\npath = "far.csv"\n')
    assert main(["forecast", "--config", str(plan), "--out", str(tmp_path / "out"), "--check", "3",
                 "--quiet"]) == 0
    forecast = json.loads((tmp_path / "out" / "forecast.json").read_text())
    assert forecast["samples"]["far"]["kept_catalogue"] and forecast["scans"]["z_max[far]"] == []
    x = np.log10(1 + result.catalog.z)  # one method, no selection: the exact weighted lever arm
    w = 1.0 / (0.3**2 + 0.1**2 + 0.15**2)
    assert forecast["sigma_k"] == pytest.approx((w * np.sum((x - x.mean()) ** 2)) ** -0.5, rel=0.03)


def test_sigma_k_scales_as_inverse_sqrt_of_size():
    tables = [sample("near", 40, (0.01, 0.05), "dynamical", selection={"kind": "sphere_of_influence"}),
              sample("far", 60, (0.8, 1.5), "virial", selection={"kind": "flux_limit", "flux_limit": 1e-13})]
    plan = make_plan(tables, model={"host_errors": "calibrated"}, forecast={"mc_objects": 3000})
    info = information(plan, mc_objects=3000)
    sizes = base_sizes(plan)
    for factor in (4.0, 16.0):
        grown = {name: n * factor for name, n in sizes.items()}
        # the offset prior does not grow with the data, so compare without it and with it
        ratio_free = info.sigma_k(sizes, offset_width=np.inf) / info.sigma_k(grown, offset_width=np.inf)
        assert ratio_free == pytest.approx(np.sqrt(factor), rel=1e-6)
    assert info.sigma_k(grown) < info.sigma_k(sizes) / 2


def test_degenerate_plan_follows_offset_prior_and_anchor_collapses_it():
    # Local dynamical, distant virial: k and delta[virial] are separated only by the offset prior.
    plan = make_plan([sample("near", 50, (0.01, 0.05), "dynamical"),
                      sample("far", 100, (1.0, 2.0), "virial")], forecast={"mc_objects": MC})
    assert plan.anchor_table is not None and plan.anchor_table["method"] == "virial"
    info = information(plan)
    rows = scans.width_scan(info, plan)
    sigmas = [row["sigma_k"] for row in rows]
    assert np.all(np.diff(sigmas) > 0)  # wider offset prior, wider k
    one_method = closed_form_sigma_k([(50, 0.01, 0.05, 0.1, 0.15), (100, 1.0, 2.0, 0.4, 0.15)], 0.3)
    within_only = closed_form_sigma_k([(50, 0.01, 0.05, 0.1, 0.15), (100, 1.0, 2.0, 0.4, 0.15)], 0.3,
                                      separate_intercepts=True)
    assert info.sigma_k(base_sizes(plan), offset_width=1e-4) == pytest.approx(one_method, rel=0.05)
    assert sigmas[-1] == pytest.approx(within_only, rel=0.05)  # no prior: within-sample lever arms only
    width = {row["width"]: row["sigma_k"] for row in rows}
    assert width[1.0] > 2.5 * width[0.1]
    breaker = {row["n"]: row for row in scans.breaker_scan(info, plan)}
    assert breaker[0]["sigma_k_free"] > 2.5 * breaker[0]["sigma_k_narrow"]   # follows the prior
    assert breaker[300]["sigma_k_free"] < 1.1 * breaker[300]["sigma_k_narrow"]  # ... no longer
    assert breaker[300]["sigma_k_free"] < breaker[0]["sigma_k_free"] / 3
    needed = scans.cheapest_breaker(info, plan)
    assert 10 < needed["n"] < 300
    below = {**base_sizes(plan), "anchor": int(needed["n"] * 0.9)}
    assert info.sigma_k(below, offset_scale=np.inf) > 1.1 * info.sigma_k(below, offset_scale=1 / 3)


def test_unmeasurable_rows_are_said_so(forecast_dir, tmp_path):
    # σ_k infinite (in memory) or null (in JSON): k not measurable in that row of a scan
    result = json.loads((forecast_dir / "forecast.json").read_text())
    result["scans"]["breaker"][0]["sigma_k_free"] = float("inf")
    result["scans"]["offset_width"][-1]["sigma_k"] = None
    text = forecast_markdown(result)
    assert text.count("∞ (not measurable)") == 2
    forecast_figure(result, tmp_path / "f.png")
    assert (tmp_path / "f.png").read_bytes()[:4] == b"\x89PNG"


def test_exclusion_power_hand_values():
    # Φ(|k_true − k0|/σ − t): a 3σ-away null is excluded at 3σ half the time (common practice).
    assert exclusion_power(1.0, 0.0, 1.0 / 3.0, 3.0) == pytest.approx(0.5)
    assert exclusion_power(1.0, 3.0, 1.0 / 3.0, 3.0) == pytest.approx(stats.norm.cdf(3.0))
    assert exclusion_power(1.0, 0.0, np.inf, 3.0) == 0.0


PLAN = """
seed = 5
[truth]
k = 1.0
[model]
host_errors = "first_order"
[forecast]
mc_objects = 2000
[[sample]]
name = "near"
n = {n_near}
z_range = {near_range}
method = "dynamical"
[[sample]]
name = "far"
n = 80
z_range = {far_range}
method = "{far_method}"
"""


def write_plan(tmp_path, n_near=40, near_range="[0.01, 0.1]", far_range="[0.8, 1.6]", far_method="virial"):
    path = tmp_path / "plan.toml"
    path.write_text(PLAN.format(n_near=n_near, near_range=near_range, far_range=far_range,
                                far_method=far_method))
    return path


@pytest.fixture(scope="module")
def forecast_dir(tmp_path_factory):
    """One run of the command on a small plan (shared by the output and report tests)."""
    root = tmp_path_factory.mktemp("forecast")
    out = root / "out"
    assert main(["forecast", "--config", str(write_plan(root)), "--out", str(out), "--check", "4",
                 "--quiet"]) == 0
    return out


def test_forecast_command_writes_its_outputs(forecast_dir):
    out = forecast_dir
    assert {p.name for p in out.iterdir()} == {"forecast.json", "summary.md", "forecast.png"}
    result = json.loads((out / "forecast.json").read_text())
    sigma, t = result["sigma_k"], result["threshold_sigma"]
    assert t == 3.0 and sigma > 0
    assert result["power_exclude_k0"] == pytest.approx(stats.norm.cdf(1.0 / sigma - t))
    assert result["power_exclude_k3"] == pytest.approx(stats.norm.cdf(2.0 / sigma - t))
    assert result["check"]["n"] == 4 and result["check"]["std"] > 0 and "mean" in result["check"]
    for name in ("n_all", "n[near]", "n[far]", "offset_width", "breaker", "z_max[far]"):
        assert isinstance(result["scans"][name], list) and result["scans"][name]
    planned = next(r for r in result["scans"]["n_all"] if r["factor"] == 1.0)
    assert planned["sigma_k"] == pytest.approx(sigma)
    assert f"σ(k) = {sigma:.3f}" in (out / "summary.md").read_text()


def test_report_shows_the_forecast(forecast_dir, tmp_path):
    sigma = json.loads((forecast_dir / "forecast.json").read_text())["sigma_k"]
    written = build_report([forecast_dir], tmp_path / "report.html")
    assert written.problems == ()  # forecast.json holds every key the page reads, well typed
    page = written.path.read_text()
    assert "Breaking the degeneracy between k and the offset of virial masses" in page
    assert f"{sigma:.3f}" in page and "forecast.png" in page


def test_report_escapes_forecast_text_and_names_a_malformed_file(forecast_dir, tmp_path, capsys):
    folder = tmp_path / "fc"
    shutil.copytree(forecast_dir, folder)
    document = json.loads((folder / "forecast.json").read_text())
    document["samples"]["<script>alert('s')</script>"] = document["samples"].pop("near")
    document["warnings"] = ["<img src=x onerror=alert(1)>"]
    (folder / "forecast.json").write_text(json.dumps(document))
    page = build_report([folder], tmp_path / "a.html").path.read_text()
    assert "<script" not in page.lower() and "<img src=x" not in page
    assert "&lt;img src=x onerror=alert(1)&gt;" in page
    document["sigma_k"] = "0.3"
    (folder / "forecast.json").write_text(json.dumps(document))
    assert main(["report", str(folder), "--out", str(tmp_path / "b.html")]) == 3
    assert "key sigma_k: expected a finite number, got '0.3'" in capsys.readouterr().err


@pytest.mark.parametrize("edit, message", [
    ({"n_near": 2}, "sample 'near': key 'n': expected at least 3 objects, got 2"),
    ({"near_range": "[0.02, 0.025]", "far_range": "[0.02, 0.03]"}, "no redshift lever arm"),
    ({"far_method": "maser_scaling"}, "key 'log_mbh_err' is required for method 'maser_scaling'"),
])
def test_impossible_plan_exits_2_with_one_line(tmp_path, capsys, edit, message):
    out = tmp_path / "out"
    path = write_plan(tmp_path, **edit)
    assert main(["forecast", "--config", str(path), "--out", str(out), "--check", "0"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and message in err and str(path) in err
    assert not out.exists()


def test_bad_anchor_and_missing_catalogue_exit_2(tmp_path, capsys):
    path = write_plan(tmp_path)
    text = path.read_text()
    path.write_text(text.replace("mc_objects = 2000", 'mc_objects = 2000\nanchor = "nowhere"'))
    assert main(["forecast", "--config", str(path), "--out", str(tmp_path / "o")]) == 2
    assert "forecast.anchor: expected a sample of the plan other than the distant one" in capsys.readouterr().err
    path.write_text(text + '[[sample]]\nname = "old"\npath = "missing.csv"\n')
    assert main(["forecast", "--config", str(path), "--out", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err
    assert "missing.csv" in err and len(err.strip().splitlines()) == 1
    assert not (tmp_path / "o").exists()


def test_bad_options_exit_2(tmp_path, capsys):
    path = write_plan(tmp_path)
    assert main(["forecast", "--config", str(path), "--check", "-1"]) == 2
    assert "--check: expected an integer >= 0, got -1" in capsys.readouterr().err
    path.write_text(path.read_text().replace("mc_objects = 2000", "mc_objects = 2000\nthreshold = 3"))
    assert main(["forecast", "--config", str(path), "--out", str(tmp_path / "o")]) == 2
    assert "forecast: unknown key 'threshold'" in capsys.readouterr().err
