"""Generate the bundled demo catalogues from analysis/demo_scenario.toml (invented scenario).

Writes demo_data/<sample>.csv, demo_data/truth.json and demo_data/run.toml (the run configuration
that declares each sample's selection). Deterministic: the scenario's seed fixes every number.
Run: .venv/bin/python analysis/make_demo_data.py
"""

import json
import sys
from pathlib import Path

from cosmogrow.catalog_io import write_catalog
from cosmogrow.config import load_toml
from cosmogrow.outputs import to_jsonable
from cosmogrow.simulate import simulate_population

ROOT = Path(__file__).resolve().parent.parent
SCENARIO = ROOT / "analysis" / "demo_scenario.toml"
OUT = ROOT / "demo_data"


def toml_value(value):
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{k} = {toml_value(v)}" for k, v in value.items()) + " }"
    if isinstance(value, str):
        return json.dumps(value)
    return repr(value)


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
    (OUT / "truth.json").write_text(json.dumps(to_jsonable(truth), indent=2) + "\n")
    print(f"wrote {len(catalog)} objects in {len(scenario['sample'])} samples to {OUT}", file=sys.stderr)


if __name__ == "__main__":
    main()
