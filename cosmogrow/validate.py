"""Checking configuration values once, at the edge: strict types, finite numbers, physical ranges.

Each checker takes a value and the key the user wrote it under (``model.z_ref``, ``--seed``) and
returns the value, or raises a one-line ConfigError "KEY: expected ..., got VALUE". A boolean is
only ``true``/``false`` (never the string "no"), a number is never a boolean, a string or NaN.
`in_file` puts the configuration file's name in front of every ConfigError raised inside it, so
every configuration message names its file.
"""

import contextlib
import math

from .errors import ConfigError

#: Seeds are handed to numpy's SeedSequence, which takes non-negative integers; 2**63 keeps them
#: exact in JSON readers that use doubles only for larger values.
SEED_MAX = 2**63 - 1


def is_number(value):
    """True for an int or float that is not a boolean (NaN and inf count as numbers here)."""
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def boolean(value, key):
    """`value` if it is True or False; else ConfigError."""
    if not isinstance(value, bool):
        raise ConfigError(f"{key}: expected true or false, got {value!r}")
    return value


def number(value, key, *, low=None, high=None, low_open=False, unit=""):
    """A finite number in [low, high] (or (low, high] with `low_open`), as a float.

    Parameters
    ----------
    value : object
    key : str, the key or option as the user wrote it
    low, high : float, optional bounds
    low_open : bool, the lower bound is excluded
    unit : str, appended to the bounds in the message (e.g. "dex")
    """
    ok = is_number(value) and math.isfinite(value)
    if ok and low is not None:
        ok = value > low if low_open else value >= low
    if ok and high is not None:
        ok = value <= high
    if not ok:
        bounds = []
        if low is not None:
            bounds.append(f"{'>' if low_open else '>='} {low:g}")
        if high is not None:
            bounds.append(f"<= {high:g}")
        text = f" {' and '.join(bounds)}" if bounds else ""
        raise ConfigError(f"{key}: expected a finite number{text}{' ' + unit if unit else ''}, "
                          f"got {value!r}")
    return float(value)


def integer(value, key, *, low=None):
    """An integer (not a boolean) >= `low`."""
    if not isinstance(value, int) or isinstance(value, bool) or (low is not None and value < low):
        bound = f" >= {low}" if low is not None else ""
        raise ConfigError(f"{key}: expected an integer{bound}, got {value!r}")
    return value


def seed(value, key="seed"):
    """A random seed: an integer in [0, 2**63 - 1]."""
    if not isinstance(value, int) or isinstance(value, bool) or not 0 <= value <= SEED_MAX:
        raise ConfigError(f"{key}: expected an integer from 0 to 2**63 - 1, got {value!r}")
    return value


def text(value, key):
    """A non-empty string."""
    if not isinstance(value, str) or not value.strip():
        raise ConfigError(f"{key}: expected a non-empty string, got {value!r}")
    return value


def choice(value, key, choices):
    """One of `choices` (strings)."""
    if not isinstance(value, str) or value not in choices:
        raise ConfigError(f"{key}: expected one of {', '.join(choices)}, got {value!r}")
    return value


def table(value, key):
    """A TOML table (dict)."""
    if not isinstance(value, dict):
        raise ConfigError(f"{key}: expected a table, got {value!r}")
    return value


@contextlib.contextmanager
def in_file(source):
    """Prefix every ConfigError raised inside with `source` (a file name), unless it names it already."""
    try:
        yield
    except ConfigError as exc:
        message = str(exc)
        if source and not message.startswith(str(source)):
            raise ConfigError(f"{source}: {message}") from None
        raise
