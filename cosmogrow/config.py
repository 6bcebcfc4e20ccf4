"""Run configuration: a TOML file (and command-line overrides) parsed into frozen objects once.

A run configuration looks like::

    seed = 42
    [cosmology]                    # optional; default Planck18
    name = "Planck18"
    [model]
    form = "ratio"                 # "ratio" (beta = 1) or "relation" (beta free)
    z_ref = 0.0
    log_mstar_pivot = 11.0
    scatter = "shared"             # or "per_sample"
    zero_point_method = "dynamical"
    method_offset_width = 0.3      # dex, Gaussian prior sd of mass-method offsets (or a table per method)
    zero_point_host_type = "quiescent"  # default: the main host type of the lowest-redshift sample
    host_offset_width = 1.0        # dex, Gaussian prior sd of host-type offsets (or a table per type)
    host_growth = 0.0              # gamma, fixed
    outliers = false
    host_errors = "calibrated"     # or "first_order" (see model.calibrated_hosts)
    [priors]                       # uniform ranges; see model.DEFAULT_PRIORS
    k = [-10.0, 10.0]
    [sampler]
    walkers = 32
    max_steps = 20000
    autocorr_factor = 50
    [[sample]]
    name = "local"
    path = "local.csv"             # relative to this file
    columns = { logM = "log_mbh" } # file column -> standard column
    method = "dynamical"           # used when the file has no method column
    selection = { kind = "mass_cut", log_mbh_min = 8.4, on = "observed" }
"""

import tomllib
from dataclasses import dataclass, field, replace
from pathlib import Path

from .errors import ConfigError

FORMS = ("ratio", "relation")
SCATTER_MODES = ("shared", "per_sample")
HOST_ERROR_MODES = ("calibrated", "first_order")
_TOP_KEYS = {"seed", "cosmology", "model", "priors", "sampler", "sample", "crosscheck", "verdicts"}
_MODEL_KEYS = {"form", "z_ref", "log_mstar_pivot", "scatter", "zero_point_method",
               "method_offset_width", "host_growth", "outliers", "host_errors",
               "zero_point_host_type", "host_offset_width"}
_SAMPLER_KEYS = {"walkers", "max_steps", "autocorr_factor", "check_every"}
# Keys once accepted without effect: refused with the reason, not silently ignored.
_NOT_READ = {"out": "the results folder is given on the command line with --out",
             "sampler.progress": "progress lines are printed unless --quiet is given"}
_SAMPLE_KEYS = {"name", "path", "columns", "method", "selection", "drop_invalid"}


@dataclass(frozen=True)
class SampleSpec:
    """One sample of a run: where its catalogue is and how to read and select it."""

    path: Path
    name: str | None = None
    columns: dict = field(default_factory=dict)
    method: str | None = None
    selection: tuple = ()
    drop_invalid: bool = False


@dataclass(frozen=True)
class ModelOptions:
    """Options of the population model (docs/method.md#model)."""

    form: str = "ratio"
    z_ref: float = 0.0
    log_mstar_pivot: float = 11.0
    scatter: str = "shared"
    zero_point_method: str | None = None
    method_offset_width: object = 0.3
    zero_point_host_type: str | None = None
    # Host types differ physically (AGN hosts sit ~0.5-1 dex below quiescent early types in
    # M_BH/M*: docs/method.md#model), so their offsets get a wider prior than calibrations.
    host_offset_width: object = 1.0
    host_growth: float = 0.0
    outliers: bool = False
    host_errors: str = "calibrated"


@dataclass(frozen=True)
class SamplerOptions:
    """Options of the MCMC run (docs/method.md#estimators). walkers = 0 chooses max(32, 4 ndim)."""

    walkers: int = 0
    max_steps: int = 20000
    autocorr_factor: float = 50.0
    check_every: int = 100


@dataclass(frozen=True)
class RunConfig:
    """Everything a fit needs besides the data."""

    samples: tuple = ()
    model: ModelOptions = ModelOptions()
    priors: dict = field(default_factory=dict)
    sampler: SamplerOptions = SamplerOptions()
    cosmology: object = None
    seed: int | None = None
    source: str = "<defaults>"
    raw: dict = field(default_factory=dict)

    def with_overrides(self, *, form=None, seed=None, catalogs=None):
        """Command-line flags win: a form, a seed, or catalogue paths replacing the sample list.

        A catalogue given on the command line keeps the options of a configured sample with the
        same resolved path.
        """
        config = self
        if form is not None:
            _check_choice("model.form", form, FORMS, self.source)
            config = replace(config, model=replace(config.model, form=form))
        if seed is not None:
            config = replace(config, seed=int(seed))
        if catalogs:
            known = {spec.path.resolve(): spec for spec in config.samples}
            samples = tuple(known.get(Path(p).resolve(), SampleSpec(path=Path(p))) for p in catalogs)
            config = replace(config, samples=samples)
        return config

    def to_dict(self):
        """JSON-friendly description of the configuration actually used."""
        from dataclasses import asdict

        return {"source": self.source, "seed": self.seed, "cosmology": self.cosmology,
                "model": asdict(self.model), "priors": {k: list(v) for k, v in self.priors.items()},
                "sampler": asdict(self.sampler),
                "samples": [{"path": str(s.path), "name": s.name, "columns": s.columns,
                             "method": s.method, "selection": list(s.selection),
                             "drop_invalid": s.drop_invalid} for s in self.samples]}


def load_toml(path):
    """Parse a TOML file; a syntax error becomes a one-line ConfigError naming the file."""
    path = Path(path)
    if not path.is_file():
        raise ConfigError(f"{path}: configuration file not found")
    try:
        return tomllib.loads(path.read_text())
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{path}: invalid TOML: {exc}") from None


def read_run_config(path=None):
    """Read a run configuration file (None gives the defaults)."""
    if path is None:
        return RunConfig()
    return parse_run_config(load_toml(path), base_dir=Path(path).parent, source=str(path))


def parse_run_config(raw, *, base_dir=Path("."), source="<config>"):
    """Validate a parsed TOML mapping and build a RunConfig."""
    _check_keys(raw, _TOP_KEYS, "", source)
    model = _parse_model(raw.get("model", {}), source)
    sampler = _parse_sampler(raw.get("sampler", {}), source)
    priors = _parse_priors(raw.get("priors", {}), source)
    samples = tuple(_parse_sample(entry, i, base_dir, source) for i, entry in enumerate(raw.get("sample", [])))
    seed = raw.get("seed")
    if seed is not None and (not isinstance(seed, int) or seed < 0):
        raise ConfigError(f"{source}: seed: expected a non-negative integer, got {seed!r}")
    cosmology = raw.get("cosmology")
    return RunConfig(samples=samples, model=model, priors=priors, sampler=sampler,
                     cosmology=cosmology, seed=seed, source=source, raw=raw)


def _parse_model(table, source):
    _check_keys(table, _MODEL_KEYS, "model.", source)
    options = ModelOptions(**table)
    _check_choice("model.form", options.form, FORMS, source)
    _check_choice("model.scatter", options.scatter, SCATTER_MODES, source)
    _check_choice("model.host_errors", options.host_errors, HOST_ERROR_MODES, source)
    for key in ("z_ref", "log_mstar_pivot", "host_growth"):
        _check_number(f"model.{key}", getattr(options, key), source)
    if options.z_ref < 0:
        raise ConfigError(f"{source}: model.z_ref: expected >= 0, got {options.z_ref!r}")
    for key in ("method_offset_width", "host_offset_width"):
        widths = getattr(options, key)
        values = widths.values() if isinstance(widths, dict) else [widths]
        for value in values:
            _check_number(f"model.{key}", value, source)
            if value <= 0:
                raise ConfigError(f"{source}: model.{key}: expected > 0 dex, got {value!r}")
    return options


def _parse_sampler(table, source):
    _check_keys(table, _SAMPLER_KEYS, "sampler.", source)
    options = SamplerOptions(**table)
    if not isinstance(options.walkers, int) or options.walkers < 0:
        raise ConfigError(f"{source}: sampler.walkers: expected an integer >= 0, got {options.walkers!r}")
    if not isinstance(options.max_steps, int) or options.max_steps < 100:
        raise ConfigError(f"{source}: sampler.max_steps: expected an integer >= 100, got {options.max_steps!r}")
    _check_number("sampler.autocorr_factor", options.autocorr_factor, source)
    return options


def _parse_priors(table, source):
    priors = {}
    for name, bounds in table.items():
        if (not isinstance(bounds, list) or len(bounds) != 2
                or not all(isinstance(b, (int, float)) for b in bounds) or not bounds[0] < bounds[1]):
            raise ConfigError(f"{source}: priors.{name}: expected [low, high] with low < high, got {bounds!r}")
        priors[name] = (float(bounds[0]), float(bounds[1]))
    return priors


def _parse_sample(entry, index, base_dir, source):
    where = f"sample[{index + 1}]"
    if not isinstance(entry, dict):
        raise ConfigError(f"{source}: {where}: expected a table, got {entry!r}")
    _check_keys(entry, _SAMPLE_KEYS, f"{where}.", source)
    if "path" not in entry:
        raise ConfigError(f"{source}: {where}: missing key 'path'")
    path = Path(entry["path"])
    if not path.is_absolute():
        path = Path(base_dir) / path
    selection = entry.get("selection", ())
    if isinstance(selection, dict):
        selection = (selection,)
    return SampleSpec(path=path, name=entry.get("name"), columns=dict(entry.get("columns", {})),
                      method=entry.get("method"), selection=tuple(selection),
                      drop_invalid=bool(entry.get("drop_invalid", False)))


def _check_keys(table, allowed, prefix, source):
    if not isinstance(table, dict):
        raise ConfigError(f"{source}: {prefix.rstrip('.')}: expected a table, got {table!r}")
    unknown = sorted(set(table) - set(allowed))
    for key in unknown:
        if prefix + key in _NOT_READ:
            raise ConfigError(f"{source}: key '{prefix}{key}' is not read: {_NOT_READ[prefix + key]}")
    if unknown:
        raise ConfigError(f"{source}: unknown key '{prefix}{unknown[0]}'; expected one of "
                          f"{', '.join(sorted(allowed))}")


def _check_choice(key, value, choices, source):
    if value not in choices:
        raise ConfigError(f"{source}: {key}: expected one of {', '.join(choices)}, got {value!r}")


def _check_number(key, value, source):
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ConfigError(f"{source}: {key}: expected a number, got {value!r}")
