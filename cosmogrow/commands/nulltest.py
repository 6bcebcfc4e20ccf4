"""`cosmogrow nulltest`: null tests of a k measurement (permutation, splits, subsets, selection)."""

import sys
from pathlib import Path

from ..config import read_run_config
from ..fit import load_data
from ..nulltests import ALPHA, DEFAULT_REPEATS, run_null_tests
from ..outputs import staged_directory, write_json
from ..replicas import MODES
from ._common import positive
from .fit import resolve_seed


def register(subparsers):
    parser = subparsers.add_parser(
        "nulltest", help="null tests of a k measurement",
        description="Run the null tests of DESIGN.md §8 on the data of a run configuration: "
                    "redshift permutation, reference split, leave samples out, host-mass matching, "
                    "single method, and k = 0 with the data's selection.")
    parser.add_argument("--config", required=True, help="run configuration (TOML)")
    parser.add_argument("--out", default="nulltests", help="results folder (default: nulltests)")
    parser.add_argument("--seed", type=int,
                        help="random seed (default: the config's, else chosen and recorded)")
    parser.add_argument("--repeats", type=int, default=DEFAULT_REPEATS,
                        help=f"permutations, splits and k = 0 mocks per test (default {DEFAULT_REPEATS})")
    parser.add_argument("--mode", choices=MODES, default="fast",
                        help="estimator: fast (MAP + Laplace, default) or mcmc")
    parser.add_argument("--alpha", type=float, default=ALPHA,
                        help=f"a test fails when its p-value is below this (default {ALPHA:g})")
    parser.add_argument("--quiet", action="store_true", help="no progress lines")
    parser.set_defaults(run=run)


def run(args):
    from ..report.null_figures import nulltests_figure
    from ..report.null_markdown import nulltests_markdown

    positive("--repeats", args.repeats)
    config = resolve_seed(read_run_config(args.config), args.seed)
    data = load_data(config)
    progress = None if args.quiet else (lambda name: print(f"  running {name}", file=sys.stderr))
    result = run_null_tests(config, data, mode=args.mode, seed=config.seed, repeats=args.repeats,
                            alpha=args.alpha, on_test=progress)
    out = Path(args.out)
    with staged_directory(out) as stage:
        write_json(stage / "nulltests.json", {**result, "config": config.to_dict(), "inputs": data.files})
        text = nulltests_markdown(result)
        (stage / "summary.md").write_text(text)
        nulltests_figure(result, stage / "nulltests.png")
    print(text)
    print(f"results written to {out}/")
    return 0
