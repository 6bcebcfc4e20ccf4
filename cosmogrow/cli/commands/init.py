"""`cosmogrow init`: a commented run configuration written from catalogues.

The path from "I have catalogue files" to the commands that need a run configuration (nulltest,
challenge, inject with a design): the catalogues are read and checked as `fit` reads them, and the
file lists their samples, mass methods and host types, with the selection of every sample left to
fill in from the choices listed. `fit --config RUN.toml` then fits exactly what `fit CATALOG...`
fits.
"""

import json
import os
import sys
from dataclasses import fields
from pathlib import Path

import numpy as np

from ...config import FORMS, HOST_ERROR_MODES, SCATTER_MODES, RunConfig
from ...data.catalog import DEFAULT_METHOD
from ...errors import ConfigError
from ...inference.fit import load_data
from ...model.likelihood import DEFAULT_PRIORS, choose_zero_point
from ...selection.physics import MODELS, REQUIRED
from ._common import add_seed_option


def register(subparsers):
    parser = subparsers.add_parser(
        "init", help="write a commented run configuration for catalogues",
        description="Read catalogues as `fit` does and write a run configuration (TOML) listing "
                    "their samples, mass methods and host types, with each sample's selection left "
                    "to fill in from the choices listed (docs/method.md#selection).")
    parser.add_argument("catalogs", nargs="+", metavar="CATALOG", help="catalogue files")
    parser.add_argument("--out", default="run.toml", metavar="RUN.toml",
                        help="configuration file to write (default: run.toml)")
    add_seed_option(parser, "seed written into the file (default: chosen now)")
    parser.add_argument("--force", action="store_true", help="replace an existing file")
    parser.set_defaults(run=run)


def run(args):
    out = Path(args.out)
    if out.is_dir():
        raise ConfigError(f"--out {out}: is a directory; expected a file name such as run.toml")
    if out.exists() and not args.force:
        raise ConfigError(f"--out {out}: exists; give --force to replace it")
    data = load_data(RunConfig().with_overrides(catalogs=args.catalogs))
    seed = args.seed if args.seed is not None else int(np.random.SeedSequence().entropy % 2**32)
    text = run_config_text(args.catalogs, data, out.resolve().parent, seed)
    _write_atomically(out, text)
    print(f"run configuration written to {out}; fill in each sample's selection, then "
          f"`cosmogrow fit --config {out}`", file=sys.stderr)
    return 0


def _write_atomically(path, text):
    """Write beside `path`, then rename: the file appears whole or not at all."""
    tmp = path.parent / f".{path.name}.partial-{os.getpid()}"
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp.write_text(text)
        os.replace(tmp, path)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        raise ConfigError(f"--out {path}: cannot write there ({exc.strerror or exc})") from None


def _string(value):
    """A TOML basic string (JSON escapes are valid TOML)."""
    return json.dumps(str(value), ensure_ascii=False)


def run_config_text(catalogs, data, base_dir, seed):
    """The commented TOML text of a run configuration for these catalogues.

    Parameters
    ----------
    catalogs : list of paths, as given
    data : FitData of those catalogues
    base_dir : Path, folder of the configuration file (sample paths are written relative to it)
    seed : int
    """
    catalog = data.catalog
    methods = ", ".join(catalog.method_names)
    lines = [
        "# Run configuration written by `cosmogrow init` (see docs/method.md).",
        f"# Catalogues: {len(catalogs)} file(s), {len(catalog)} objects; samples "
        f"{', '.join(catalog.sample_names)}; mass methods {methods}; host types "
        f"{', '.join(catalog.host_type_names)}.",
        "# Paths are relative to this file. Command-line options (--seed, --form) win over it.",
        "",
        f"seed = {seed}",
        "",
        "# [cosmology]                  # default Planck18; or name = \"WMAP9\"; or H0, Om0 (, Ode0, w0, wa)",
        "",
        "[model]",
        f"form = \"ratio\"                   # one of {', '.join(FORMS)} (docs/method.md#model)",
        f"zero_point_method = {_string(choose_zero_point(catalog))}"
        f"   # one of the data's methods: {methods}",
        f"# scatter = \"shared\"             # one of {', '.join(SCATTER_MODES)}",
        "# method_offset_width = 0.3      # dex; or a table { default = 0.3, <method> = ... }",
        f"# host_errors = \"calibrated\"     # one of {', '.join(HOST_ERROR_MODES)} (docs/method.md#host-errors)",
        "# outliers = false",
        "",
        "# [priors]                     # uniform ranges",
        *[f"# {name} = [{low:g}, {high:g}]" for name, (low, high) in DEFAULT_PRIORS.items()],
        "",
        "# [sampler]",
        "# walkers = 0                  # 0: max(32, 4 x parameters)",
        "# max_steps = 20000",
        "# autocorr_factor = 50         # converged when steps > 50 x the largest autocorrelation time",
        "",
        *_selection_choices(),
    ]
    names = [info["samples"][0] for info in data.files]
    for path, info in zip(catalogs, data.files):
        unique = names.count(info["samples"][0]) == 1
        lines += ["", *_sample_lines(Path(path), info, catalog, base_dir, unique=unique)]
    return "\n".join(lines) + "\n"


def _selection_choices():
    """Comment lines listing every selection kind with its keys (required first)."""
    lines = ["# Selection of a sample (docs/method.md#selection): one table, or a list of tables",
             "# (the cuts multiply). Kinds and keys, required ones first:"]
    for kind, model in MODELS.items():
        keys = [f.name for f in fields(model)]
        required = list(REQUIRED[kind])
        optional = [key for key in keys if key not in required]
        lines.append(f"#   {kind}: {', '.join(required + [f'[{key}]' for key in optional])}")
    lines.append("# Leave it out only for a sample that was not selected on black-hole mass.")
    return lines


def _sample_lines(path, info, catalog, base_dir, *, unique):
    """The [[sample]] table of one catalogue file."""
    rows = np.isin(catalog.sample, info["samples"])
    methods = sorted(set(catalog.method[rows].tolist()))
    host_types = sorted(set(catalog.host_type[rows].tolist()))
    stem = info["samples"][0] if len(info["samples"]) == 1 else None
    relative = os.path.relpath(path.resolve(), base_dir)
    if relative.startswith(".."):
        relative = str(path.resolve())  # outside the configuration's folder: an absolute path
    lines = ["[[sample]]"]
    if stem is not None and unique:
        lines.append(f"name = {_string(stem)}")
    lines += [f"path = {_string(relative)}",
              f"# {info['rows']} objects; samples {', '.join(info['samples'])}; methods "
              f"{', '.join(methods)}; host types {', '.join(host_types)}"]
    if DEFAULT_METHOD in methods:
        lines.append("# method = \"dynamical\"          # rows without a method: dynamical, reverberation, "
                     "virial, ...")
    lines += ["# selection = { kind = \"mass_cut\", log_mbh_min = 8.0, on = \"observed\" }   # fill in"]
    return lines
