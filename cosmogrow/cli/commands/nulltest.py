"""`cosmogrow nulltest`: null tests of a k measurement (permutation, splits, subsets, selection)."""

import sys

from ...checks.null_suite import ALPHA, DEFAULT_REPEATS, run_null_tests
from ._common import add_check_options, check_alpha, load_checked_run, positive, write_check_outputs


def register(subparsers):
    parser = subparsers.add_parser(
        "nulltest", help="null tests of a k measurement",
        description="Run the null tests of docs/method.md#null-tests on the data of a run configuration: "
                    "redshift permutation, reference split, leave samples out, host-mass matching, "
                    "single method, and k = 0 with the data's selection.")
    add_check_options(parser, out_default="nulltests", count_option="--repeats",
                      count_default=DEFAULT_REPEATS, count_help="permutations, splits and k = 0 mocks per test",
                      alpha=ALPHA, alpha_help="a test fails when its p-value is below this")
    parser.set_defaults(run=run)


def run(args):
    from ...report.null_figures import nulltests_figure
    from ...report.null_markdown import nulltests_markdown

    positive("--repeats", args.repeats)
    check_alpha(args.alpha)
    config, data = load_checked_run(args)
    progress = None if args.quiet else (lambda name: print(f"  running {name}", file=sys.stderr))
    result = run_null_tests(config, data, mode=args.mode, seed=config.seed, repeats=args.repeats,
                            alpha=args.alpha, on_test=progress)
    text = nulltests_markdown(result)
    out = write_check_outputs(args.out, "nulltests", result, config, data, text, nulltests_figure)
    print(text)
    print(f"results written to {out}/")
    return 0
