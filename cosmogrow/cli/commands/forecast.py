"""`cosmogrow forecast`: how well would a planned set of observations measure k?"""

import sys
from pathlib import Path

from ...errors import ConfigError
from ...outputs import staged_directory, write_json
from ._common import add_force_option, add_seed_option, claim_out

RESULT_FILE = "forecast.json"


def register(subparsers):
    parser = subparsers.add_parser(
        "forecast", help="predict the precision of k for planned observations",
        description="Expected Fisher information of the fit's likelihood (selection included) for a "
                    "plan of samples: the width of k, the power to exclude k = 0 and k = 3, scans "
                    "against sample sizes, depth and offset-prior width, the sample that breaks a "
                    "k-offset degeneracy, and a check by mocks fitted with the fast estimator "
                    "(see docs/method.md#forecast).")
    parser.add_argument("--config", required=True, metavar="PLAN.toml",
                        help="plan: a simulator configuration with optional [model], [priors], [forecast]")
    parser.add_argument("--out", default="forecast", metavar="DIR", help="results folder (default: forecast)")
    parser.add_argument("--check", type=int, default=None, metavar="N",
                        help="mocks fitted to check the prediction (default: the plan's, else 40; 0: none)")
    add_seed_option(parser, "random seed (default: the plan's, else 0)")
    parser.add_argument("--threshold", type=float, default=None, metavar="SIGMA",
                        help="exclusion threshold in sigma (default: the plan's, else 3)")
    parser.add_argument("--quiet", action="store_true", help="no progress lines")
    add_force_option(parser)
    parser.set_defaults(run=run)


def _progress(quiet):
    if quiet:
        return None

    def report(done, total):
        if done == total or done % max(1, total // 5) == 0:
            print(f"  mocks: {done}/{total}", file=sys.stderr)

    return report


def run(args):
    from dataclasses import replace

    from ...forecast.plan import read_plan
    from ...forecast.run import run_forecast
    from ...report.forecast_figures import forecast_figure
    from ...report.forecast_markdown import forecast_markdown

    if args.check is not None and args.check < 0:
        raise ConfigError(f"--check: expected an integer >= 0, got {args.check}")
    if args.threshold is not None and not 0 < args.threshold < 20:
        raise ConfigError(f"--threshold: expected a number in (0, 20), got {args.threshold}")
    claim_out(args, "forecast")
    plan = read_plan(args.config)
    if args.threshold is not None:
        plan = replace(plan, threshold_sigma=float(args.threshold))
    result = run_forecast(plan, check=args.check, seed=args.seed, on_mock=_progress(args.quiet))
    text = forecast_markdown(result)
    out = Path(args.out)
    with staged_directory(out) as stage:
        write_json(stage / RESULT_FILE, result)
        (stage / "summary.md").write_text(text)
        forecast_figure(result, stage / "forecast.png")
    print(text)
    print(f"results written to {out}/")
    return 0
