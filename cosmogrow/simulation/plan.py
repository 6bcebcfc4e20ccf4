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

from dataclasses import dataclass

from ..background import get_cosmology
from ..errors import ConfigError
from ..model.truth import Truth, finite_number as _number, parse_truth
from .massfunction import mass_function_from_config
from ..selection.compiled import build_selection

METHOD_ERRORS = {"dynamical": 0.1, "reverberation": 0.2, "virial": 0.4}
TOP_KEYS = ("seed", "cosmology", "mass_function", "truth", "sample")
SAMPLE_KEYS = ("name", "n", "z_range", "method", "log_mbh_err", "log_mstar_err", "log_mstar_min",
               "log_mstar_max", "host_type", "selection")
SAMPLE_DEFAULTS = {"log_mstar_err": 0.15, "log_mstar_min": 10.0, "log_mstar_max": 12.5}


@dataclass(frozen=True)
class SimulatedSample:
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
    """A SimulatedSample from the index-th [[sample]] table."""
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
    return SimulatedSample(name=name, n=n, z_lo=z_lo, z_hi=z_hi, method=method, **errors, **limits,
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
