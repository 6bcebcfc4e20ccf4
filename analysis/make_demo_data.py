"""Generate the bundled demo catalogues from analysis/demo_scenario.toml (invented scenario).

Writes demo_data/<sample>.csv, demo_data/truth.json, demo_data/run.toml (the run configuration
that declares each sample's selection) and demo_data/forecast.toml (the programme as a forecast plan). Deterministic: the scenario's seed fixes every number.
Run: .venv/bin/python analysis/make_demo_data.py
"""

import json
import sys
from pathlib import Path

from cosmogrow.data.readers import write_catalog
from cosmogrow.config import load_toml
from cosmogrow.outputs import to_jsonable
from cosmogrow.simulation.population import simulate_population

ROOT = Path(__file__).resolve().parent.parent
SCENARIO = ROOT / "analysis" / "demo_scenario.toml"
OUT = ROOT / "demo_data"


def toml_value(value):
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{k} = {toml_value(v)}" for k, v in value.items()) + " }"
    if isinstance(value, str):
        return json.dumps(value)
    if isinstance(value, list):
        return "[" + ", ".join(toml_value(v) for v in value) + "]"
    return repr(value)


# A small calibration campaign of the demo design (the full default is 6 grid points x 200 mocks).
CAMPAIGN = """# Demo calibration campaign (written by analysis/make_demo_data.py).
seed = 7
design = "run.toml"

[grid]
k = [0.0, 1.0, 3.0]
realisations = 40

[estimator]
mode = "fast"
compare_plain = true

[sbc]
n = 60
prior = [-1.0, 4.0]
"""


FORECAST_HEAD = """# Forecast plan of the demo programme (written by analysis/make_demo_data.py): the four invented
# surveys as designed, fitted as in run.toml. Run: cosmogrow forecast --config forecast.toml
seed = {seed}

[forecast]
threshold_sigma = 3.0
check = 20            # mocks fitted to check the predicted width of k
mc_objects = 10000    # simulated selected objects per sample for the expected information
anchor = "brisk"      # the local virial sample that ties virial masses to dynamical ones

[model]
form = "ratio"
zero_point_method = "dynamical"
"""


def forecast_plan_text(scenario):
    """The demo programme as a forecast plan: the scenario's truth and samples plus [model] and
    [forecast] tables."""
    lines = [FORECAST_HEAD.format(seed=scenario["seed"])]
    for table in ("cosmology", "truth"):
        lines.append(f"[{table}]")
        lines += [f"{key} = {toml_value(value)}" for key, value in scenario[table].items()]
        lines.append("")
    for spec in scenario["sample"]:
        lines.append("[[sample]]")
        lines += [f"{key} = {toml_value(value)}" for key, value in spec.items()]
        lines.append("")
    return "\n".join(lines)


def write_remnants(seed):
    """Invented stellar-mass black holes in binaries (names of our own) for the remnant test."""
    import numpy as np

    rng = np.random.default_rng(seed)
    names = ["Halden X-1", "Brisk J0412", "Corvid V7", "Tessel X-3", "Meridian BH-2", "Lantern X-9"]
    mass = np.round(rng.uniform(5.0, 15.0, len(names)), 2)
    err = np.round(0.1 * mass, 2)
    age = np.round(rng.uniform(0.02, 3.0, len(names)), 3)
    rows = ["id,mass,mass_err,z_obs,age_gyr"]
    rows += [f"{n},{m},{e},0.0,{a}" for n, m, e, a in zip(names, mass, err, age)]
    (OUT / "remnants.csv").write_text("\n".join(rows) + "\n")


def main():
    scenario = load_toml(SCENARIO)
    catalog, truth = simulate_population(scenario)
    OUT.mkdir(exist_ok=True)
    lines = ["# Run configuration of the demo (written by analysis/make_demo_data.py).",
             f"seed = {scenario['seed']}", "", "[model]", 'form = "ratio"', 'zero_point_method = "dynamical"', ""]
    for spec in scenario["sample"]:
        name = spec["name"]
        write_catalog(catalog.subset(catalog.sample == name), OUT / f"{name}.csv")
        lines += ["[[sample]]", f'name = "{name}"', f'path = "{name}.csv"',
                  f"selection = {toml_value(spec['selection'])}", ""]
    (OUT / "run.toml").write_text("\n".join(lines))
    (OUT / "campaign.toml").write_text(CAMPAIGN)
    (OUT / "forecast.toml").write_text(forecast_plan_text(scenario))
    write_remnants(scenario["seed"])
    (OUT / "truth.json").write_text(json.dumps(to_jsonable(truth), indent=2) + "\n")
    print(f"wrote {len(catalog)} objects in {len(scenario['sample'])} samples to {OUT}", file=sys.stderr)


if __name__ == "__main__":
    main()
