"""`cosmogrow demo`: every stage on the bundled demo data, then the report."""

import sys
import time
from pathlib import Path

from ...errors import ConfigError

EXIT_BAD_INPUT = 2


def default_data_dir():
    """The checkout's demo_data/ (beside the package), else ./demo_data."""
    beside = Path(__file__).resolve().parents[3] / "demo_data"
    return beside if beside.is_dir() else Path("demo_data")


def register(subparsers):
    parser = subparsers.add_parser("demo", help="run every stage on the bundled demo data",
                                   description="Fit (plain and selection-aware), calibrate, run null "
                                               "tests, challenge k = 3, budget, remnants, report.")
    parser.add_argument("--out", default="demo_results", help="results folder (default: demo_results)")
    parser.add_argument("--data", help="demo data folder (default: the checkout's demo_data/)")
    parser.add_argument("--only-fit", action="store_true", help="run only the two fits and the report")
    parser.set_defaults(run=run)


def stages(data, out, only_fit=False):
    """(name, argv) of every stage, in order."""
    run_toml = str(data / "run.toml")
    fit_dir = str(out / "fit")
    plan = [("fit, selection-aware", ["fit", "--config", run_toml, "--out", fit_dir, "--quiet"]),
            ("fit, plain (selection ignored)", ["fit", "--config", run_toml, "--out", str(out / "fit_plain"),
                                                "--plain", "--quiet"])]
    if not only_fit:
        plan += [
            ("calibration campaign", ["inject", "--config", str(data / "campaign.toml"),
                                      "--out", str(out / "campaign"), "--quiet"]),
            ("null tests", ["nulltest", "--config", run_toml, "--out", str(out / "nulltests"),
                            "--repeats", "20", "--quiet"]),
            ("challenge of k = 3", ["challenge", "--config", run_toml, "--claim", "3",
                                    "--out", str(out / "challenge"), "--replicas", "40", "--quiet"]),
            ("dark-energy budget", ["budget", "--posterior", fit_dir, "--out", str(out / "budget")]),
            ("stellar remnants", ["remnants", str(data / "remnants.csv"), "--posterior", fit_dir,
                                  "--out", str(out / "remnants")]),
        ]
    folders = [argv[argv.index("--out") + 1] for _, argv in plan]
    plan.append(("report", ["report", *folders, "--out", str(out / "report.html"),
                            "--title", "cosmogrow demo: an invented four-survey programme",
                            "--truth", str(data / "truth.json")]))
    return plan


def run(args):
    cli_main = args.invoke
    data = Path(args.data) if args.data else default_data_dir()
    if not (data / "run.toml").is_file():
        raise ConfigError(f"{data}: no demo data here (expected run.toml); give --data DIR")
    out = Path(args.out)
    for name, argv in stages(data, out, args.only_fit):
        start = time.perf_counter()
        print(f"[demo] {name} ...", file=sys.stderr, flush=True)
        code = cli_main(argv)
        if code == EXIT_BAD_INPUT:
            print(f"[demo] stage '{name}' failed", file=sys.stderr)
            return code
        note = " (exit code 3: flagged; see the report's warnings)" if code == 3 else ""
        print(f"[demo] {name} done in {time.perf_counter() - start:.1f} s{note}", file=sys.stderr)
    print(f"report: {(out / 'report.html').resolve()}")
    return 0
