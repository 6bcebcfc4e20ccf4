"""`cosmogrow challenge`: is a claimed k consistent with the data once their selection is modelled?"""

import sys
from pathlib import Path

from ..challenge import ALPHA, DEFAULT_REPLICAS, challenge_claim
from ..config import read_run_config
from ..fit import load_data
from ..outputs import staged_directory, write_json
from ..replicas import MODES
from .fit import resolve_seed


def register(subparsers):
    parser = subparsers.add_parser(
        "challenge", help="test a claimed k against mocks of the data's own design",
        description="Simulate the data's design (with each sample's selection) under a claimed k "
                    "and under k = 0, fit every mock with the plain and the selection-aware "
                    "likelihood, and place the data's estimate among them.")
    parser.add_argument("--config", required=True, help="run configuration (TOML)")
    parser.add_argument("--claim", required=True, type=float, help="the claimed coupling exponent k")
    parser.add_argument("--out", default="challenge", help="results folder (default: challenge)")
    parser.add_argument("--seed", type=int,
                        help="random seed (default: the config's, else chosen and recorded)")
    parser.add_argument("--replicas", type=int, default=DEFAULT_REPLICAS,
                        help=f"mocks per hypothesis (default {DEFAULT_REPLICAS})")
    parser.add_argument("--mode", choices=MODES, default="fast",
                        help="estimator: fast (MAP + Laplace, default) or mcmc")
    parser.add_argument("--alpha", type=float, default=ALPHA,
                        help=f"a hypothesis is inconsistent when p is below this (default {ALPHA:g})")
    parser.add_argument("--quiet", action="store_true", help="no progress lines")
    parser.set_defaults(run=run)


def _progress(quiet):
    if quiet:
        return None

    def report(label, done, total):
        if done == total or done % max(1, total // 10) == 0:
            print(f"  k = {label}: {done}/{total} mocks", file=sys.stderr)

    return report


def run(args):
    from ..report.null_figures import challenge_figure
    from ..report.null_markdown import challenge_markdown

    config = resolve_seed(read_run_config(args.config), args.seed)
    data = load_data(config)
    result = challenge_claim(config, data, args.claim, replicas=args.replicas, mode=args.mode,
                             seed=config.seed, alpha=args.alpha, on_progress=_progress(args.quiet))
    out = Path(args.out)
    with staged_directory(out) as stage:
        write_json(stage / "challenge.json", {**result, "config": config.to_dict(), "inputs": data.files})
        text = challenge_markdown(result)
        (stage / "summary.md").write_text(text)
        challenge_figure(result, stage / "challenge.png")
    print(text)
    print(f"results written to {out}/")
    return 0
