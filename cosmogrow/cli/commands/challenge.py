"""`cosmogrow challenge`: is a claimed k consistent with the data once their selection is modelled?"""

import sys

from ...checks.challenge import DEFAULT_REPLICAS, challenge_claim
from ... import validate
from ._common import add_check_options, load_checked_run, write_check_outputs


def register(subparsers):
    parser = subparsers.add_parser(
        "challenge", help="test a claimed k against mocks of the data's own design",
        description="Simulate the data's design (with each sample's selection) under a claimed k "
                    "and under k = 0, fit every mock with the plain and the selection-aware "
                    "likelihood, and place the data's estimate among them. The verdict words and "
                    "the threshold are the fit's (docs/method.md#challenge).")
    parser.add_argument("--claim", required=True, type=float, help="the claimed coupling exponent k")
    add_check_options(parser, out_default="challenge", count_option="--replicas",
                      count_default=DEFAULT_REPLICAS, count_help="mocks per hypothesis, at least 3")
    parser.add_argument("--threshold", type=float,
                        help="significance (σ) at which a hypothesis is not consistent (default: the "
                             "configuration's verdicts.threshold, else 3, as for `fit`)")
    parser.set_defaults(run=run)


def _progress(quiet):
    if quiet:
        return None

    def report(label, done, total):
        if done == total or done % max(1, total // 10) == 0:
            print(f"  k = {label}: {done}/{total} mocks", file=sys.stderr)

    return report


def run(args):
    from ...inference.verdicts import verdict_options
    from ...report.null_figures import challenge_figure
    from ...report.null_markdown import challenge_markdown

    validate.number(args.claim, "--claim")  # its range is the run's prior on k (checked with the data)
    config, data = load_checked_run(args)
    threshold = verdict_options(config.raw.get("verdicts", {}), config.source,
                                threshold=args.threshold)["threshold"]
    result = challenge_claim(config, data, args.claim, replicas=args.replicas, mode=args.mode,
                             seed=config.seed, threshold=threshold, on_progress=_progress(args.quiet))
    text = challenge_markdown(result)
    out = write_check_outputs(args.out, "challenge", result, config, data, text, challenge_figure)
    print(text)
    print(f"results written to {out}/")
    return 0
