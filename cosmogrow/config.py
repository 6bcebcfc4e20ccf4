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

import math
import tomllib
from dataclasses import dataclass, field, replace
from pathlib import Path

from . import validate
from .errors import ConfigError
from .validate import in_file

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
class CatalogSample:
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
    source: str | None = None          # the TOML file, None without one
    raw: dict = field(default_factory=dict)

    def with_overrides(self, *, form=None, seed=None, catalogs=None):
        """Command-line flags win: a form, a seed, or catalogue paths replacing the sample list.

        A catalogue given on the command line keeps the options of a configured sample with the
        same resolved path.
        """
        config = self
        if form is not None:
            validate.choice(form, "--form", FORMS)
            config = replace(config, model=replace(config.model, form=form))
        if seed is not None:
            config = replace(config, seed=validate.seed(seed, "--seed"))
        if catalogs:
            known = {spec.path.resolve(): spec for spec in config.samples}
            samples = tuple(known.get(Path(p).resolve(), CatalogSample(path=Path(p))) for p in catalogs)
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
    """Parse a TOML file (UTF-8, a byte-order mark allowed); every problem is one ConfigError naming it."""
    path = Path(path)
    if path.is_dir():
        raise ConfigError(f"{path}: is a directory; expected a TOML configuration file")
    if not path.exists():
        raise ConfigError(f"{path}: configuration file not found")
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise ConfigError(f"{path}: cannot read the configuration file ({exc.strerror or exc})") from None
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise ConfigError(f"{path}: expected UTF-8 text; byte 0x{data[exc.start]:02x} at offset "
                          f"{exc.start} is not (binary file, or another encoding such as Latin-1?)") from None
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{path}: invalid TOML: {exc}") from None


def read_run_config(path=None):
    """Read a run configuration file (None gives the defaults)."""
    if path is None:
        return RunConfig()
    return parse_run_config(load_toml(path), base_dir=Path(path).parent, source=str(path))


def parse_run_config(raw, *, base_dir=Path("."), source=None):
    """Validate a parsed TOML mapping and build a RunConfig; every error names `source`.

    Every value is checked for its type and range here, and the cosmology is built once, so that
    a bad value stops the run before any data are read; the selection tables and the names that
    must exist in the data are checked by `inference.fit.load_data` (`check_against_data`).
    """
    from .background import get_cosmology

    with in_file(source):
        _check_keys(raw, _TOP_KEYS, "")
        model = _parse_model(raw.get("model", {}))
        sampler = _parse_sampler(raw.get("sampler", {}))
        priors = _parse_priors(validate.table(raw.get("priors", {}), "priors"))
        entries = raw.get("sample", [])
        if not isinstance(entries, list):
            raise ConfigError(f"sample: expected [[sample]] tables, got {entries!r}")
        samples = tuple(_parse_sample(entry, i, base_dir) for i, entry in enumerate(entries))
        _check_unique_names(samples)
        seed = raw.get("seed")
        if seed is not None:
            validate.seed(seed, "seed")
        cosmology = raw.get("cosmology")
        get_cosmology(cosmology, deferred=True)
        validate.table(raw.get("crosscheck", {}), "crosscheck")
    return RunConfig(samples=samples, model=model, priors=priors, sampler=sampler,
                     cosmology=cosmology, seed=seed, source=source, raw=raw)


def check_against_data(config, methods, samples, host_types=()):
    """Names the configuration gives must exist in the data: the zero-point method and host type,
    the methods and host types of an offset-width table, the cross-check's reference sample.
    ConfigError naming the file."""
    with in_file(config.source):
        for kind, names in (("method", methods), ("host_type", host_types)):
            zero_key = "zero_point_method" if kind == "method" else "zero_point_host_type"
            width_key = "method_offset_width" if kind == "method" else "host_offset_width"
            what = "a method" if kind == "method" else "a host type"
            zero_point = getattr(config.model, zero_key)
            if zero_point is not None and zero_point not in names:
                raise ConfigError(f"model.{zero_key}: {zero_point!r} is not {what} of the data; "
                                  f"expected one of {', '.join(names) or '(none given)'}")
            widths = getattr(config.model, width_key)
            for name in widths if isinstance(widths, dict) else ():
                if name != "default" and name not in names:
                    raise ConfigError(f"model.{width_key}.{name}: {name!r} is not {what} of the "
                                      f"data; expected some of default, {', '.join(names)}")
        reference = config.raw.get("crosscheck", {}).get("reference")
        if isinstance(reference, str) and reference not in samples:
            raise ConfigError(f"crosscheck.reference: {reference!r} is not a sample of the data; "
                              f"expected one of {', '.join(samples)}")


def _parse_model(table):
    _check_keys(table, _MODEL_KEYS, "model.")
    options = ModelOptions(**table)
    validate.choice(options.form, "model.form", FORMS)
    validate.choice(options.scatter, "model.scatter", SCATTER_MODES)
    validate.choice(options.host_errors, "model.host_errors", HOST_ERROR_MODES)
    validate.number(options.z_ref, "model.z_ref", low=0, high=20)
    validate.number(options.log_mstar_pivot, "model.log_mstar_pivot", low=0, high=13, unit="(log10 Msun)")
    validate.number(options.host_growth, "model.host_growth", low=-10, high=10)
    validate.boolean(options.outliers, "model.outliers")
    for key in ("zero_point_method", "zero_point_host_type"):
        if getattr(options, key) is not None:
            validate.text(getattr(options, key), f"model.{key}")
    for key in ("method_offset_width", "host_offset_width"):
        widths = getattr(options, key)
        pairs = ([(f"model.{key}.{name}", value) for name, value in widths.items()]
                 if isinstance(widths, dict) else [(f"model.{key}", widths)])
        for label, value in pairs:
            validate.number(value, label, low=0, low_open=True, unit="dex")
    return options


def _parse_sampler(table):
    _check_keys(table, _SAMPLER_KEYS, "sampler.")
    options = SamplerOptions(**table)
    validate.integer(options.walkers, "sampler.walkers", low=0)
    validate.integer(options.max_steps, "sampler.max_steps", low=100)
    validate.number(options.autocorr_factor, "sampler.autocorr_factor", low=1)
    validate.integer(options.check_every, "sampler.check_every", low=1)
    return options


# Physical limits of prior ranges (a scatter is never negative, a fraction lies in [0, 1]).
_PRIOR_LIMITS = {"sigma_int": (0.0, None), "sigma_out": (0.0, None), "f_out": (0.0, 1.0)}


def _parse_priors(table):
    priors = {}
    for name, bounds in table.items():
        if (not isinstance(bounds, list) or len(bounds) != 2
                or not all(validate.is_number(b) and math.isfinite(b) for b in bounds)
                or not bounds[0] < bounds[1]):
            raise ConfigError(f"priors.{name}: expected [low, high], finite numbers with low < high, "
                              f"got {bounds!r}")
        low, high = _PRIOR_LIMITS.get(name, (None, None))
        if (low is not None and bounds[0] < low) or (high is not None and bounds[1] > high):
            raise ConfigError(f"priors.{name}: expected a range within [{low:g}, "
                              f"{'inf' if high is None else f'{high:g}'}], got {bounds!r}")
        priors[name] = (float(bounds[0]), float(bounds[1]))
    return priors


def _parse_sample(entry, index, base_dir):
    where = f"sample[{index + 1}]"
    validate.table(entry, where)
    _check_keys(entry, _SAMPLE_KEYS, f"{where}.")
    if "path" not in entry:
        raise ConfigError(f"{where}: missing key 'path'")
    path = Path(validate.text(entry["path"], f"{where}.path"))
    if not path.is_absolute():
        path = Path(base_dir) / path
    name = entry.get("name")
    if name is not None:
        validate.text(name, f"{where}.name")
    method = entry.get("method")
    if method is not None:
        validate.text(method, f"{where}.method")
    columns = validate.table(entry.get("columns", {}), f"{where}.columns")
    for source, target in columns.items():
        validate.text(target, f"{where}.columns.{source}")
    selection = entry.get("selection", ())
    if isinstance(selection, dict):
        selection = (selection,)
    if not isinstance(selection, (list, tuple)):
        raise ConfigError(f"{where}.selection: expected a table or a list of tables, got {selection!r}")
    for i, model in enumerate(selection):
        validate.table(model, f"{where}.selection[{i + 1}]")
    drop_invalid = validate.boolean(entry.get("drop_invalid", False), f"{where}.drop_invalid")
    return CatalogSample(path=path, name=name, columns=dict(columns), method=method,
                      selection=tuple(selection), drop_invalid=drop_invalid)


def _check_unique_names(samples):
    named = [spec.name for spec in samples if spec.name is not None]
    doubled = sorted({name for name in named if named.count(name) > 1})
    if doubled:
        raise ConfigError(f"sample: two [[sample]] tables are named {doubled[0]!r}; expected distinct names")


def _check_keys(table, allowed, prefix):
    validate.table(table, prefix.rstrip(".") or "configuration")
    unknown = sorted(set(table) - set(allowed))
    for key in unknown:
        if prefix + key in _NOT_READ:
            raise ConfigError(f"key '{prefix}{key}' is not read: {_NOT_READ[prefix + key]}")
    if unknown:
        raise ConfigError(f"unknown key '{prefix}{unknown[0]}'; expected one of {', '.join(sorted(allowed))}")
