"""The README's configuration examples are valid: each TOML block parses with the parser it documents."""

import re
import tomllib
from pathlib import Path

from cosmogrow.campaigns.config import parse_campaign_config
from cosmogrow.config import parse_run_config
from cosmogrow.forecast.plan import parse_plan
from cosmogrow.simulation.plan import parse_sim_config

README = Path(__file__).resolve().parent.parent / "README.md"


def blocks():
    return [tomllib.loads(text) for text in re.findall(r"```toml\n(.*?)```", README.read_text(), re.S)]


def test_readme_examples_parse(tmp_path):
    found = set()
    for raw in blocks():
        if "design" in raw:
            (tmp_path / "run.toml").write_text("")
            parse_campaign_config(raw, base_dir=tmp_path)
            found.add("campaign")
        elif "forecast" in raw:
            parse_plan(raw)
            found.add("forecast")
        elif "truth" in raw:
            parse_sim_config(raw)
            found.add("simulation")
        else:
            config = parse_run_config(raw)
            assert config.samples[0].selection[0]["kind"] == "mass_cut"
            found.add("run")
    assert found == {"run", "simulation", "campaign", "forecast"}
