"""Helpers shared by subcommands: reading a fit's chain of k, checking numeric options."""

from pathlib import Path

import numpy as np

from ..errors import ConfigError, InputError

SAMPLES_FILE = "samples.npz"


def read_k_samples(fit_dir):
    """Flat posterior samples of k from ``FIT_DIR/samples.npz`` (array ``k``), as written by the fit.

    Raises
    ------
    InputError
        When the directory or file is missing, has no array ``k``, or holds no or non-finite samples.
    """
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
    if not np.isfinite(value) or value < 0 or (value == 0 and not allow_zero):
        relation = ">= 0" if allow_zero else "> 0"
        raise ConfigError(f"{name}: expected a finite number {relation}, got {value}")
    return value
