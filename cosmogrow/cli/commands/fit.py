"""`cosmogrow fit`: the posterior of k from catalogues.

Only the standard library is imported at module level, so that `cosmogrow fit --help` answers at
once; numpy, scipy, astropy, pandas and matplotlib are imported where a fit uses them.
"""

import math
import shutil
import sys
from pathlib import Path

from ._common import add_seed_option, claim_out, resolve_seed

# Results written but flagged: the chain did not converge, or k is not identified.
EXIT_NOT_CONVERGED = 3


def register(subparsers):
    parser = subparsers.add_parser("fit", help="fit k to catalogues of black-hole and host masses",
                                   description="Fit the coupling exponent k of M_BH ∝ a^k.")
    parser.add_argument("catalogs", nargs="*", metavar="CATALOG",
                        help="catalogue files (CSV, TSV, ECSV, FITS, Parquet); replace the config's samples")
    parser.add_argument("--config", help="run configuration (TOML)")
    parser.add_argument("--out", default="results", help="results folder (default: results)")
    add_seed_option(parser, "random seed (default: the config's, else chosen and recorded)")
    parser.add_argument("--form", choices=("ratio", "relation"), help="model form (default: ratio)")
    parser.add_argument("--plain", action="store_true", help="ignore declared selection (naive likelihood)")
    again = parser.add_mutually_exclusive_group()
    again.add_argument("--resume", action="store_true",
                       help="continue the chain of an earlier or killed run into --out (same inputs, "
                            "configuration and seed)")
    again.add_argument("--force", action="store_true", help="replace the results of an earlier fit in --out")
    parser.add_argument("--quiet", action="store_true", help="no progress lines")
    parser.add_argument("--claim", type=float, action="append", metavar="K",
                        help="also judge this k (repeatable); 0 and 3 are always judged "
                             "(see docs/method.md#verdicts)")
    parser.add_argument("--threshold", type=float, metavar="SIGMA",
                        help="significance at which a k counts as excluded (default: the config's "
                             "verdicts.threshold, else 3)")
    parser.add_argument("--verbose", action="store_true",
                        help="print the seconds spent in each stage (also in summary.json 'timings')")
    parser.set_defaults(run=run)


def progress_printer(quiet):
    if quiet:
        return None

    def report(step, tau_max, converged):
        ratio = step / tau_max if tau_max > 0 else float("nan")
        state = "converged" if converged else "running"
        print(f"  step {step:6d}  tau_max {tau_max:7.1f}  chain/tau {ratio:6.1f}  {state}", file=sys.stderr)

    return report


def run(args):
    from ...outputs import StageTimes

    timer = StageTimes()
    with timer.stage("imports"):  # the numerical libraries (numpy, scipy, pandas, astropy, emcee, h5py)
        from ...config import read_run_config
        from ...errors import CosmogrowError
        from ...inference.fit import load_data, run_fit
        from ...inference.resume import chain_attrs, fit_fingerprint, stored_seed
        from ...inference.verdicts import verdict_options
        from ...outputs import staged_directory, stale_stages
        from ._drawing import FigureDrawers, chain_payloads, summary_payloads
    out = Path(args.out)
    with timer.stage("read"):
        config = read_run_config(args.config).with_overrides(form=args.form, catalogs=args.catalogs)
        claim_out(args, "fit", resume=args.resume)
        if args.resume and args.seed is None and config.seed is None:
            args.seed = stored_seed(out)
        config = resolve_seed(config, args.seed)
        data = load_data(config)
    verdicts = verdict_options(config.raw.get("verdicts", {}), config.source,
                               claims=args.claim, threshold=args.threshold)
    fingerprint = fit_fingerprint(config, data, selection_aware=not args.plain)
    previous = _chain_to_continue(args, out, config, fingerprint)
    try:
        with staged_directory(out) as stage, FigureDrawers(stage, config, data) as drawers:
            if previous is not None:
                shutil.copy2(previous, stage / "chain.h5")
            result = run_fit(config, data, chain_path=stage / "chain.h5", selection_aware=not args.plain,
                             on_check=progress_printer(args.quiet), verdicts=verdicts,
                             chain_attrs=chain_attrs(fingerprint, config.seed), timer=timer,
                             on_sampled=lambda model, chain: drawers.submit(chain_payloads(model, chain)),
                             parallel=True)
            if not math.isfinite(result.summary["k"]["median"]):
                raise CosmogrowError("the fit gave a non-finite k; nothing written (check the inputs' "
                                     "ranges and the [priors] table)")
            if args.resume and _worse_than_before(out, result):
                raise _KeepEarlier
            drawers.submit(summary_payloads(result.summary))
            write_fit_outputs(stage, config, data, result, timer, drawers)
    except _KeepEarlier:
        print(f"cosmogrow fit: the continued chain did not converge but the results in {out} did; "
              "they are kept", file=sys.stderr)
        return EXIT_NOT_CONVERGED
    if args.force or previous is not None:  # staging folders of killed runs: replaced or continued
        for stage in stale_stages(out):
            if (stage / "chain.h5").exists():
                shutil.rmtree(stage, ignore_errors=True)
    print((out / "summary.md").read_text())
    if args.verbose:
        print(format_timings(result.summary["timings"]))
    print(f"results written to {out}/")
    identified = result.summary["identifiability"]["identified"]
    return 0 if result.chain.converged and identified else EXIT_NOT_CONVERGED


def _chain_to_continue(args, out, config, fingerprint):
    """With --resume, the chain file to continue (inference.resume.find_resumable), else None."""
    from ...inference.resume import find_resumable

    if not args.resume:
        return None
    previous = find_resumable(out, fingerprint, config.sampler.max_steps, config.source)
    if previous is None and not args.quiet:
        print(f"cosmogrow fit: no chain of this run to continue in {out}; starting a new one", file=sys.stderr)
    return previous


class _KeepEarlier(Exception):
    """The new results are worse than those already in --out."""


def _worse_than_before(out, result):
    """True when `out` holds a converged fit and this one is not converged (never replace it)."""
    import json

    try:
        before = json.loads((out / "summary.json").read_text())["convergence"]["converged"]
    except (OSError, ValueError, KeyError, TypeError):
        return False
    return bool(before) and not result.chain.converged


def format_timings(timings):
    """The stage timings as aligned lines, slowest first after the total."""
    stages = sorted(((name, sec) for name, sec in timings.items() if name not in ("total", "beside")),
                    key=lambda item: -item[1])
    total = timings.get("total", 0.0) or 1.0
    lines = [f"stage timings (s): total {timings.get('total', 0.0):.2f}"]
    lines += [f"  {name:<13s}{sec:8.2f}  {100 * sec / total:5.1f} %" for name, sec in stages]
    beside = timings.get("beside", {})
    if beside:
        lines.append("done beside the stages, in a second process (s): "
                     + ", ".join(f"{name} {sec:.2f}" for name, sec in beside.items()))
    return "\n".join(lines)


def write_fit_outputs(folder, config, data, result, timer=None, drawers=None):
    """summary.md, summary.tex, samples.npz, the figures (corner, relation, offsets, crosscheck) and,
    last, summary.json with the stage `timings` ("figures" and "writing" included).

    `drawers` (`_drawing.FigureDrawers`) holds figures already being drawn; without it every
    figure is drawn here. The "figures" stage is the time spent waiting for them.
    """
    import numpy as np

    from ...outputs import StageTimes, write_json
    from ...report.markdown import fit_markdown
    from ._drawing import FigureDrawers, chain_payloads, summary_payloads

    timer = StageTimes() if timer is None else timer
    summary = result.summary
    with timer.stage("figures"):
        if drawers is None:
            drawers = FigureDrawers(folder, config, data, processes=0)
            drawers.submit({**chain_payloads(result.model, result.chain), **summary_payloads(summary)})
        drawers.finish()
    with timer.stage("writing"):
        from ...report.latex import posterior_table

        (folder / "summary.md").write_text(fit_markdown(summary))
        (folder / "summary.tex").write_text(posterior_table(summary))
        samples = result.chain.samples
        np.savez(folder / "samples.npz", names=np.array(result.model.names), samples=samples,
                 k=samples[:, result.model.index_k], log_prob=result.chain.log_prob)
    summary["timings"] = timer.as_dict()
    write_json(folder / "summary.json", summary)
