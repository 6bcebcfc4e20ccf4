"""`cosmogrow fit`: the posterior of k from catalogues."""

import shutil
import sys
from pathlib import Path

import numpy as np

from ...config import read_run_config
from ...inference.fit import load_data, run_fit
from ...inference.verdicts import verdict_options
from ...outputs import staged_directory, write_json

# Results written but flagged: the chain did not converge, or k is not identified.
EXIT_NOT_CONVERGED = 3


def register(subparsers):
    parser = subparsers.add_parser("fit", help="fit k to catalogues of black-hole and host masses",
                                   description="Fit the coupling exponent k of M_BH ∝ a^k.")
    parser.add_argument("catalogs", nargs="*", metavar="CATALOG",
                        help="catalogue files (CSV, TSV, ECSV, FITS, Parquet); replace the config's samples")
    parser.add_argument("--config", help="run configuration (TOML)")
    parser.add_argument("--out", default="results", help="results folder (default: results)")
    parser.add_argument("--seed", type=int, help="random seed (default: the config's, else chosen and recorded)")
    parser.add_argument("--form", choices=("ratio", "relation"), help="model form (default: ratio)")
    parser.add_argument("--plain", action="store_true", help="ignore declared selection (naive likelihood)")
    parser.add_argument("--resume", action="store_true", help="continue the chain in OUT/chain.h5")
    parser.add_argument("--quiet", action="store_true", help="no progress lines")
    parser.add_argument("--claim", type=float, action="append", metavar="K",
                        help="also judge this k (repeatable); 0 and 3 are always judged "
                             "(see docs/method.md#verdicts)")
    parser.add_argument("--threshold", type=float, metavar="SIGMA",
                        help="significance at which a k counts as excluded (default: the config's "
                             "verdicts.threshold, else 3)")
    parser.set_defaults(run=run)


def resolve_seed(config, seed):
    """Command-line seed, else the config's, else a fresh one (recorded in the results)."""
    if seed is None and config.seed is None:
        seed = int(np.random.SeedSequence().entropy % 2**32)
    return config.with_overrides(seed=seed)


def progress_printer(quiet):
    if quiet:
        return None

    def report(step, tau_max, converged):
        ratio = step / tau_max if tau_max > 0 else float("nan")
        state = "converged" if converged else "running"
        print(f"  step {step:6d}  tau_max {tau_max:7.1f}  chain/tau {ratio:6.1f}  {state}", file=sys.stderr)

    return report


def run(args):
    config = read_run_config(args.config).with_overrides(form=args.form, catalogs=args.catalogs)
    config = resolve_seed(config, args.seed)
    data = load_data(config)
    verdicts = verdict_options(config.raw.get("verdicts", {}), config.source,
                               claims=args.claim, threshold=args.threshold)
    out = Path(args.out)
    with staged_directory(out) as stage:
        if args.resume and (out / "chain.h5").exists():
            shutil.copy2(out / "chain.h5", stage / "chain.h5")
        result = run_fit(config, data, chain_path=stage / "chain.h5", selection_aware=not args.plain,
                         on_check=progress_printer(args.quiet), verdicts=verdicts)
        write_fit_outputs(stage, config, data, result)
    print((out / "summary.md").read_text())
    print(f"results written to {out}/")
    identified = result.summary["identifiability"]["identified"]
    return 0 if result.chain.converged and identified else EXIT_NOT_CONVERGED


def write_fit_outputs(folder, config, data, result):
    """summary.json, summary.md, summary.tex, samples.npz and the figures
    (corner, relation, offsets, crosscheck)."""
    from ...report.check_figures import crosscheck_figure
    from ...report.fit_figures import corner_figure, offsets_figure, relation_figure
    from ...report.latex import posterior_table
    from ...report.markdown import fit_markdown

    summary = result.summary
    write_json(folder / "summary.json", summary)
    (folder / "summary.md").write_text(fit_markdown(summary))
    (folder / "summary.tex").write_text(posterior_table(summary))
    names = result.model.names
    samples = result.chain.samples
    np.savez(folder / "samples.npz", names=np.array(names), samples=samples,
             k=samples[:, result.model.index_k], log_prob=result.chain.log_prob)
    corner_figure(samples, names, folder / "corner.png")
    relation_figure(data.catalog, summary, config.model, folder / "relation.png")
    layout = result.model.layout
    medians = layout.from_dict({name: row["median"] for name, row in summary["parameters"].items()})
    offsets_figure(data.catalog, summary, samples[:, layout.index_k], config.model, folder / "offsets.png",
                   layout.offsets_by_label(medians, "method"), layout.offsets_by_label(medians, "host_type"))
    crosscheck_figure(summary.get("crosscheck"), summary["k"], folder / "crosscheck.png")
