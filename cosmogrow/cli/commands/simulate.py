"""`cosmogrow simulate`: mock catalogues from a simulator configuration, with their truth."""

from pathlib import Path

from ...data.readers import write_catalog
from ...config import load_toml
from ...errors import ConfigError
from ...outputs import staged_directory, write_json
from ...simulation.population import simulate_population
from ...validate import in_file
from ._common import add_force_option, add_seed_option, claim_out

TRUTH_FILE = "truth.json"


def register(subparsers):
    parser = subparsers.add_parser(
        "simulate", help="simulate catalogues of a population, with selection",
        description="Draw hosts, redshifts and black-hole masses for every [[sample]] of a simulator "
                    "configuration, apply each sample's selection, and write one CSV catalogue per "
                    "sample and truth.json.")
    parser.add_argument("--config", required=True, metavar="SIM.toml",
                        help="simulator configuration (TOML)")
    parser.add_argument("--out", required=True, metavar="DIR", help="output directory")
    add_seed_option(parser, "random seed (wins over the configuration's; default: the configuration's, "
                            "else chosen and recorded in truth.json)")
    add_force_option(parser)
    parser.set_defaults(run=run)


def run(args):
    config = load_toml(args.config)
    claim_out(args, "simulate")
    with in_file(args.config):
        for entry in config.get("sample", []) if isinstance(config.get("sample"), list) else []:
            name = entry.get("name") if isinstance(entry, dict) else None
            if isinstance(name, str) and ("/" in name or "\\" in name or name.startswith(".")):
                raise ConfigError(f"sample '{name}': the name is used as a file name and cannot contain "
                                  "'/' or '\\' or start with '.'")
        catalog, truth = simulate_population(config, seed=args.seed)
    names = catalog.sample_names
    out = Path(args.out)
    with staged_directory(out) as stage:
        for name in names:
            write_catalog(catalog.subset(catalog.sample == name), stage / f"{name}.csv")
        write_json(stage / TRUTH_FILE, truth)
    for info in truth["samples"]:
        print(f"{info['name']}: {info['n']} objects ({info['n_candidates']} candidates, "
              f"acceptance {info['acceptance']:.3g})")
    print(f"catalogues and {TRUTH_FILE} written to {out}/ (seed {truth['seed']})")
    return 0
