"""`cosmogrow inject`: injection-recovery campaign (and SBC) of a design; resumable."""

import sys
import time
from pathlib import Path

import numpy as np

from ...campaigns.runner import JOURNAL, STAMP, prepare_campaign, run_campaign, stored_seed
from ...campaigns.config import read_campaign_config
from ...errors import ConfigError
from ...campaigns.executors import make_executor
from ...outputs import staged_directory, write_json
from ._common import add_force_option, add_seed_option, claim_out

EXIT_FAILED_MOCKS = 3


def register(subparsers):
    parser = subparsers.add_parser(
        "inject", help="injection-recovery campaign: calibrate the k measurement of a design",
        description="Simulate mocks of a design for a grid of injected k, fit each like the data, "
                    "and report bias, coverage and power. Killed campaigns resume where they "
                    "stopped (same --out).")
    parser.add_argument("--config", required=True, help="campaign configuration (TOML)")
    parser.add_argument("--out", default="campaign", help="results folder (default: campaign)")
    where = parser.add_mutually_exclusive_group()
    where.add_argument("--workers", type=int, help="local worker processes (default: all cores)")
    where.add_argument("--scheduler", help="Dask scheduler address tcp://host:port, or 'local' "
                                           "for a LocalCluster on 127.0.0.1")
    add_seed_option(parser, "campaign seed (default: the config's, else the seed of an interrupted "
                            "run in --out, else chosen)")
    add_force_option(parser)
    parser.add_argument("--quiet", action="store_true", help="no progress lines")
    parser.set_defaults(run=run)


def progress_printer(quiet, every_s=2.0):
    """A progress callback printing a bar, the rate and the time left to stderr."""
    if quiet:
        return None
    last = [0.0]

    def report(done, total, elapsed, eta):
        now = time.monotonic()
        if done < total and now - last[0] < every_s:
            return
        last[0] = now
        filled = int(30 * done / total) if total else 30
        print(f"\r  [{'#' * filled}{'.' * (30 - filled)}] {done}/{total} mocks  "
              f"{elapsed:7.1f} s elapsed  ~{_clock(eta)} left", end="", file=sys.stderr, flush=True)
        if done == total:
            print(file=sys.stderr)

    return report


def _clock(seconds):
    if not seconds == seconds:  # NaN: rate not known yet
        return "--:--:--"
    seconds = int(round(seconds))
    return f"{seconds // 3600:d}:{seconds % 3600 // 60:02d}:{seconds % 60:02d}"


def run(args):
    spec = read_campaign_config(args.config)
    out = Path(args.out)
    if args.workers is not None and args.workers < 1:
        raise ConfigError(f"--workers: expected an integer >= 1, got {args.workers}")
    earlier = claim_out(args, "inject", resume=True)  # an interrupted campaign continues
    seed = args.seed if args.seed is not None else spec.seed
    if seed is None and not args.force:
        seed = stored_seed(out)
    if seed is None:
        seed = int(np.random.SeedSequence().entropy % 2**32)
    spec = spec.with_seed(seed)
    context = prepare_campaign(spec)
    if earlier and args.force:
        for name in (STAMP, JOURNAL):  # start afresh; the old results go when the new ones are in
            (out / name).unlink(missing_ok=True)
    executor = make_executor(workers=args.workers, scheduler=args.scheduler)
    try:
        if not args.quiet:
            print(f"campaign: {len(spec.grid)} injected k x {spec.realisations} mocks"
                  f"{f' + {spec.sbc.n} SBC mocks' if spec.sbc else ''}, {spec.mode} estimator, "
                  f"seed {spec.seed}, {executor.description}", file=sys.stderr)
        result = run_campaign(context, out, executor, on_progress=progress_printer(args.quiet))
    finally:
        executor.close()
    with staged_directory(out, keep=(STAMP, JOURNAL)) as stage:
        write_campaign_outputs(stage, result)
    print(campaign_text(result.summary))
    print(f"results written to {out}/")
    failed = int((result.results["error"] != "").sum())
    if failed:
        print(f"cosmogrow inject: {failed} of {len(result.results)} mock fits failed (see the 'error' "
              f"column of {out / 'results.parquet'})", file=sys.stderr)
        return EXIT_FAILED_MOCKS
    return 0


def write_campaign_outputs(folder, result):
    """results.parquet, summary.json and the three figures."""
    from ...report.campaign_figures import coverage_figure, recovery_figure, sbc_figure

    result.results.to_parquet(folder / "results.parquet", index=False)
    write_json(folder / "summary.json", result.summary)
    recovery_figure(result.results, result.summary, folder / "recovery.png")
    coverage_figure(result.summary, folder / "coverage.png")
    if result.summary.get("sbc"):
        sbc_figure(result.summary, folder / "sbc_ranks.png")


def campaign_text(summary):
    """A short plain-text table of the calibration."""
    lines = [f"{'estimator':>16} {'k':>5} {'n':>5} {'bias':>8} {'bias/σ':>7} {'RMSE':>7} "
             f"{'cov68':>6} {'cov95':>6} {'P(excl 0)':>9} {'P(excl 3)':>9}"]
    for name, blocks in summary["recovery"].items():
        for b in blocks:
            if not b.get("n"):
                continue
            lines.append(f"{name:>16} {b['k_injected']:5.2g} {b['n']:5d} {b['bias']:+8.3f} "
                         f"{b['bias_over_sigma']:+7.2f} {b['rmse']:7.3f} {b['coverage68']:6.3f} "
                         f"{b['coverage95']:6.3f} {b['power_exclude_k0']:9.3f} "
                         f"{b['power_exclude_k3']:9.3f}")
    for name, block in (summary.get("sbc") or {}).items():
        if block.get("p_value") is not None:
            lines.append(f"SBC {name}: {block['n']} mocks, rank uniformity chi2 p = "
                         f"{block['p_value']:.3g}")
    return "\n".join(lines)
