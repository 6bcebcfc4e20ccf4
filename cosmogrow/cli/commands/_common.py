"""Helpers shared by subcommands: reading a fit's chain of k, checking numeric options, --seed,
--out and --force."""

import argparse
import math
from pathlib import Path

from ... import validate
from ...errors import ConfigError, InputError

#: The file that marks a folder as holding a command's results (see outputs.check_out_dir).
OUT_MARKERS = {"fit": "chain.h5", "simulate": "truth.json", "inject": "campaign.json",
               "nulltest": "nulltests.json", "challenge": "challenge.json", "budget": "budget.json",
               "remnants": "remnants.json", "forecast": "forecast.json"}


def seed_type(text):
    """argparse type of --seed: an integer from 0 to 2**63 - 1."""
    try:
        return validate.seed(int(text), "--seed")
    except (ValueError, ConfigError):
        raise argparse.ArgumentTypeError(f"expected an integer from 0 to 2**63 - 1, got {text!r}") from None


def add_seed_option(parser, help_text):
    parser.add_argument("--seed", type=seed_type, help=help_text)


def add_force_option(parser):
    parser.add_argument("--force", action="store_true",
                        help="replace the results of an earlier run of this command in --out")


def claim_out(args, command, *, resume=False):
    """Refuse an unusable --out before any work (see outputs.check_out_dir); True when it holds
    results of an earlier run of `command` (replaced with --force, continued with `resume`)."""
    from ...outputs import check_out_dir

    return check_out_dir(args.out, OUT_MARKERS[command], force=getattr(args, "force", False), resume=resume)

SAMPLES_FILE = "samples.npz"


def read_k_samples(fit_dir):
    """Flat posterior samples of k from ``FIT_DIR/samples.npz`` (array ``k``), as written by the fit.

    Raises
    ------
    InputError
        When the directory or file is missing, has no array ``k``, or holds no or non-finite samples.
    """
    import numpy as np

    fit_dir = Path(fit_dir)
    path = fit_dir / SAMPLES_FILE
    if not fit_dir.is_dir():
        raise InputError(fit_dir, "not a directory; expected the output directory of `cosmogrow fit`")
    if not path.is_file():
        raise InputError(path, "file not found; expected the posterior samples written by `cosmogrow fit`")
    try:
        with np.load(path, allow_pickle=False) as data:
            if "k" not in data.files:
                raise InputError(path, f"no array 'k'; found {', '.join(data.files) or 'none'}", column="k")
            samples = np.asarray(data["k"], dtype=float).ravel()
    except (OSError, ValueError) as exc:
        raise InputError(path, f"cannot read as .npz ({exc})") from None
    if samples.size == 0:
        raise InputError(path, "array 'k' is empty", column="k")
    bad = np.flatnonzero(~np.isfinite(samples))
    if bad.size:
        raise InputError(path, "expected finite samples", row=int(bad[0]) + 1, column="k",
                         value=float(samples[bad[0]]))
    return samples


def positive(name, value, *, allow_zero=False):
    """Check a numeric option; ConfigError naming the option otherwise."""
    if value is None:
        return value
    if not math.isfinite(value) or value < 0 or (value == 0 and not allow_zero):
        relation = ">= 0" if allow_zero else "> 0"
        raise ConfigError(f"{name}: expected a finite number {relation}, got {value}")
    return value


def resolve_seed(config, seed):
    """Command-line seed, else the config's, else a fresh one (recorded in the results)."""
    if seed is None and config.seed is None:
        import numpy as np

        seed = int(np.random.SeedSequence().entropy % 2**32)
    return config.with_overrides(seed=seed)


def check_alpha(alpha):
    """--alpha is a probability strictly between 0 and 1."""
    if not (math.isfinite(alpha) and 0 < alpha < 1):
        raise ConfigError(f"--alpha: expected a number between 0 and 1 (exclusive), got {alpha}")
    return alpha


def add_check_options(parser, *, out_default, count_option, count_default, count_help, alpha=None,
                      alpha_help=None):
    """The options shared by the commands that fit mocks of a run's design (nulltest, challenge);
    `--alpha` only when `alpha` is given."""
    parser.add_argument("--config", required=True, help="run configuration (TOML)")
    parser.add_argument("--out", default=out_default, help=f"results folder (default: {out_default})")
    add_seed_option(parser, "random seed (default: the config's, else chosen and recorded)")
    add_force_option(parser)
    parser.add_argument(count_option, type=int, default=count_default,
                        help=f"{count_help} (default {count_default})")
    parser.add_argument("--mode", choices=("fast", "mcmc"), default="fast",
                        help="estimator: fast (MAP + Laplace, default) or mcmc")
    if alpha is not None:
        parser.add_argument("--alpha", type=float, default=alpha, help=f"{alpha_help} (default {alpha:g})")
    parser.add_argument("--quiet", action="store_true", help="no progress lines")


def load_checked_run(args):
    """The run configuration (seed resolved) and its data, for nulltest and challenge."""
    from ...config import read_run_config
    from ...inference.fit import load_data

    config = resolve_seed(read_run_config(args.config), args.seed)
    claim_out(args, args.command)
    return config, load_data(config)


def write_check_outputs(out, name, result, config, data, text, draw_figure):
    """NAME.json (result + configuration + inputs + package versions), summary.md and NAME.png,
    written atomically."""
    from ...outputs import package_versions, staged_directory, write_json

    out = Path(out)
    with staged_directory(out) as stage:
        write_json(stage / f"{name}.json", {**result, "config": config.to_dict(), "inputs": data.files,
                                            "versions": package_versions()})
        (stage / "summary.md").write_text(text)
        draw_figure(result, stage / f"{name}.png")
    return out
