"""The simulator's configuration: truth parameters and samples, validated once.

A simulator configuration (parsed TOML) has a top-level `seed`, optional `[cosmology]` (as in a
run configuration) and `[mass_function]` (double Schechter; default Baldry et al. 2012), a
`[truth]` table and `[[sample]]` tables. Every error is a ConfigError naming the key.

[truth] (the model's parameter names; defaults in brackets):
  k [0], alpha [8.69: log10 M_BH at M* = 1e11 Msun from the Kormendy & Ho 2013 M-M_bulge relation,
  0.49e9 Msun, taking M_bulge = M*], beta [1, the "ratio" form], sigma_int [0.28 dex, the scatter
  of that relation; or a table sample -> dex], gamma [0], s_pivot [11.0], z_ref [0.0],
  delta [{}: a table method -> offset in dex; unlisted methods 0], delta_host [{}: a table host
  type -> shift of the latent black-hole mass in dex; unlisted types 0], f_out [0], sigma_out [1.0 dex].
  Flat keys "delta[<method>]", "delta_host[<type>]" and "sigma_int[<sample>]" are accepted too.
[[sample]]: name, n (selected objects wanted), z_range = [lo, hi], method (required);
  log_mbh_err [by method: dynamical 0.1, reverberation 0.2, virial 0.4 dex (common practice);
  required for other methods], log_mstar_err [0.15 dex], log_mstar_min [10.0], log_mstar_max
  [12.5] (log10 Msun: the host mass range drawn from the mass function), host_type
  ["unspecified"], selection [none].
"""

from dataclasses import dataclass, field

import numpy as np

from ..background import get_cosmology
from ..errors import ConfigError
from .massfunction import mass_function_from_config
from ..selection.compiled import build_selection

METHOD_ERRORS = {"dynamical": 0.1, "reverberation": 0.2, "virial": 0.4}
TRUTH_DEFAULTS = {"k": 0.0, "alpha": 8.69, "beta": 1.0, "sigma_int": 0.28, "gamma": 0.0,
                  "s_pivot": 11.0, "z_ref": 0.0, "f_out": 0.0, "sigma_out": 1.0}
TOP_KEYS = ("seed", "cosmology", "mass_function", "truth", "sample")
SAMPLE_KEYS = ("name", "n", "z_range", "method", "log_mbh_err", "log_mstar_err", "log_mstar_min",
               "log_mstar_max", "host_type", "selection")
SAMPLE_DEFAULTS = {"log_mstar_err": 0.15, "log_mstar_min": 10.0, "log_mstar_max": 12.5}
#: Keys of a truth dictionary returned by the simulator that are not parameters.
TRUTH_META_KEYS = ("seed", "cosmology", "mass_function", "samples", "cosmogrow_version", "host_priors")


def _number(value, label, *, low=None, high=None, low_open=False):
    ok = isinstance(value, (int, float)) and not isinstance(value, bool) and np.isfinite(value)
    if ok and low is not None:
        ok = value > low if low_open else value >= low
    if ok and high is not None:
        ok = value <= high
    if not ok:
        bound = []
        if low is not None:
            bound.append(f"{'>' if low_open else '>='} {low}")
        if high is not None:
            bound.append(f"<= {high}")
        raise ConfigError(f"{label}: expected a finite number{' ' + ' and '.join(bound) if bound else ''}, "
                          f"got {value!r}")
    return float(value)


@dataclass(frozen=True)
class Truth:
    """True parameters of a simulation (see the module note for meanings and units)."""

    k: float = 0.0
    alpha: float = 8.69
    beta: float = 1.0
    sigma_int: object = 0.28  # float, or dict sample -> float
    gamma: float = 0.0
    s_pivot: float = 11.0
    z_ref: float = 0.0
    delta: dict = field(default_factory=dict)
    f_out: float = 0.0
    sigma_out: float = 1.0
    delta_host: dict = field(default_factory=dict)

    def scatter_of(self, sample):
        """Intrinsic scatter (dex) of a sample."""
        if isinstance(self.sigma_int, dict):
            if sample not in self.sigma_int:
                raise ConfigError(f"truth.sigma_int: no value for sample '{sample}'; "
                                  f"given for {', '.join(self.sigma_int)}")
            return self.sigma_int[sample]
        return self.sigma_int

    def offset_of(self, method):
        """Mass-method offset (dex); 0 for a method not listed."""
        return self.delta.get(method, 0.0)

    def host_offset_of(self, host_type):
        """Host-type shift of the latent black-hole mass (dex); 0 for a type not listed."""
        return self.delta_host.get(host_type, 0.0)

    def to_dict(self):
        """Nested form: delta and (per sample) sigma_int as tables, like the [truth] table."""
        out = {name: getattr(self, name) for name in self.__dataclass_fields__}
        out["delta"] = dict(self.delta)
        out["delta_host"] = dict(self.delta_host)
        if isinstance(self.sigma_int, dict):
            out["sigma_int"] = dict(self.sigma_int)
        return out


def parse_truth(table, *, where="truth"):
    """A Truth from a [truth] table, a truth dict returned by the simulator or a Truth."""
    if isinstance(table, Truth):
        return table
    if table is None:
        table = {}
    if not isinstance(table, dict):
        raise ConfigError(f"{where}: expected a table, got {table!r}")
    values = {"delta": {}, "delta_host": {}}
    for key, value in table.items():
        if key in TRUTH_META_KEYS:
            continue
        if key.startswith("delta[") and key.endswith("]"):
            values["delta"][key[6:-1]] = _number(value, f"{where}.{key}")
        elif key.startswith("delta_host[") and key.endswith("]"):
            values["delta_host"][key[11:-1]] = _number(value, f"{where}.{key}")
        elif key.startswith("sigma_int[") and key.endswith("]"):
            if not isinstance(values.get("sigma_int"), dict):
                values["sigma_int"] = {}
            values["sigma_int"][key[10:-1]] = _number(value, f"{where}.{key}", low=0)
        elif key in ("delta", "delta_host"):
            if not isinstance(value, dict):
                label = "method" if key == "delta" else "host type"
                raise ConfigError(f"{where}.{key}: expected a table {label} -> offset (dex), got {value!r}")
            values[key].update({m: _number(v, f"{where}.{key}.{m}") for m, v in value.items()})
        elif key == "sigma_int" and isinstance(value, dict):
            values["sigma_int"] = {s: _number(v, f"{where}.sigma_int.{s}", low=0) for s, v in value.items()}
        elif key in TRUTH_DEFAULTS:
            values[key] = _number(value, f"{where}.{key}", **_TRUTH_BOUNDS.get(key, {}))
        else:
            valid = ", ".join([*TRUTH_DEFAULTS, "delta", "delta_host"])
            raise ConfigError(f"{where}: unknown key {key!r}; expected some of {valid}")
    return Truth(**values)


_TRUTH_BOUNDS = {"sigma_int": {"low": 0}, "f_out": {"low": 0, "high": 0.99},
                 "sigma_out": {"low": 0, "low_open": True}, "z_ref": {"low": 0}}


@dataclass(frozen=True)
class SampleSpec:
    """One simulated sample (see the module note)."""

    name: str
    n: int
    z_lo: float
    z_hi: float
    method: str
    log_mbh_err: float
    log_mstar_err: float
    log_mstar_min: float
    log_mstar_max: float
    selection: tuple = ()
    host_type: str = "unspecified"

    def to_dict(self):
        return {"name": self.name, "n": self.n, "z_range": [self.z_lo, self.z_hi],
                "method": self.method, "log_mbh_err": self.log_mbh_err,
                "log_mstar_err": self.log_mstar_err, "log_mstar_min": self.log_mstar_min,
                "log_mstar_max": self.log_mstar_max, "host_type": self.host_type,
                "selection": [m.to_dict() for m in self.selection]}


def parse_sample(table, index):
    """A SampleSpec from the index-th [[sample]] table."""
    label = f"sample[{index}]"
    if not isinstance(table, dict):
        raise ConfigError(f"{label}: expected a table, got {table!r}")
    name = table.get("name")
    if not isinstance(name, str) or not name.strip():
        raise ConfigError(f"{label}: key 'name': expected a non-empty string, got {name!r}")
    label = f"sample '{name}'"
    unknown = sorted(set(table) - set(SAMPLE_KEYS))
    if unknown:
        raise ConfigError(f"{label}: unknown key(s) {', '.join(map(repr, unknown))}; "
                          f"expected some of {', '.join(SAMPLE_KEYS)}")
    for key in ("n", "z_range", "method"):
        if key not in table:
            raise ConfigError(f"{label}: missing key {key!r}")
    n = table["n"]
    if not isinstance(n, int) or isinstance(n, bool) or n < 1:
        raise ConfigError(f"{label}: key 'n': expected a positive integer, got {n!r}")
    z_range = table["z_range"]
    if not isinstance(z_range, (list, tuple)) or len(z_range) != 2:
        raise ConfigError(f"{label}: key 'z_range': expected [lo, hi], got {z_range!r}")
    z_lo = _number(z_range[0], f"{label}: key 'z_range'", low=0, high=20)
    z_hi = _number(z_range[1], f"{label}: key 'z_range'", low=0, high=20)
    if not z_hi > z_lo:
        raise ConfigError(f"{label}: key 'z_range': expected lo < hi, got {z_range!r}")
    method = table["method"]
    if not isinstance(method, str) or not method.strip():
        raise ConfigError(f"{label}: key 'method': expected a non-empty string, got {method!r}")
    if "log_mbh_err" not in table and method not in METHOD_ERRORS:
        raise ConfigError(f"{label}: key 'log_mbh_err' is required for method {method!r} "
                          f"(defaults exist for {', '.join(METHOD_ERRORS)})")
    errors = {key: _number(table.get(key, SAMPLE_DEFAULTS.get(key, METHOD_ERRORS.get(method))),
                           f"{label}: key {key!r}", low=0, low_open=True)
              for key in ("log_mbh_err", "log_mstar_err")}
    limits = {key: _number(table.get(key, SAMPLE_DEFAULTS[key]), f"{label}: key {key!r}", low=0, high=13)
              for key in ("log_mstar_min", "log_mstar_max")}
    if not limits["log_mstar_max"] > limits["log_mstar_min"]:
        raise ConfigError(f"{label}: key 'log_mstar_max': expected > log_mstar_min "
                          f"({limits['log_mstar_min']}), got {limits['log_mstar_max']}")
    host_type = table.get("host_type", "unspecified")
    if not isinstance(host_type, str) or not host_type.strip():
        raise ConfigError(f"{label}: key 'host_type': expected a non-empty string, got {host_type!r}")
    selection = build_selection(table.get("selection"), where=label)
    return SampleSpec(name=name, n=n, z_lo=z_lo, z_hi=z_hi, method=method, **errors, **limits,
                      selection=selection, host_type=host_type)


@dataclass(frozen=True)
class SimConfig:
    """A validated simulator configuration."""

    seed: object
    cosmology: object
    mass_function: object
    truth: Truth
    samples: tuple


def parse_sim_config(config):
    """Validate a parsed simulator TOML (dict) into a SimConfig."""
    if not isinstance(config, dict):
        raise ConfigError(f"simulation configuration: expected a table, got {type(config).__name__}")
    unknown = sorted(set(config) - set(TOP_KEYS))
    if unknown:
        raise ConfigError(f"simulation configuration: unknown key(s) {', '.join(map(repr, unknown))}; "
                          f"expected some of {', '.join(TOP_KEYS)}")
    seed = config.get("seed")
    if seed is not None and (not isinstance(seed, int) or isinstance(seed, bool) or seed < 0):
        raise ConfigError(f"seed: expected a non-negative integer, got {seed!r}")
    tables = config.get("sample")
    if isinstance(tables, dict):
        tables = [tables]
    if not isinstance(tables, list) or not tables:
        raise ConfigError("sample: expected at least one [[sample]] table")
    samples = tuple(parse_sample(table, i) for i, table in enumerate(tables))
    names = [s.name for s in samples]
    duplicated = sorted({name for name in names if names.count(name) > 1})
    if duplicated:
        raise ConfigError(f"sample: duplicate name(s) {', '.join(map(repr, duplicated))}")
    truth = parse_truth(config.get("truth"))
    for name in names:
        truth.scatter_of(name)
    if isinstance(truth.sigma_int, dict):
        extra = sorted(set(truth.sigma_int) - set(names))
        if extra:
            raise ConfigError(f"truth.sigma_int: unknown sample(s) {', '.join(map(repr, extra))}; "
                              f"samples: {', '.join(names)}")
    return SimConfig(seed=seed, cosmology=get_cosmology(config.get("cosmology")),
                     mass_function=mass_function_from_config(config.get("mass_function")),
                     truth=truth, samples=samples)
