"""A forecast plan: a simulator configuration plus the fit's model options, validated once.

A plan (TOML) is a simulator configuration (`cosmogrow.simulation.plan`: `seed`, `[cosmology]`,
`[mass_function]`, `[truth]`, `[[sample]]` with n, z_range, method, errors, host range and
selection) with three optional tables that say how the planned data would be fitted and what to
forecast::

    [model]      # as in a run configuration (form, zero_point_method, method_offset_width, ...)
    [priors]     # uniform ranges, as in a run configuration
    [forecast]
    threshold_sigma = 3.0        # exclusion threshold t (sigma)
    check = 40                   # mocks of the plan fitted to check the prediction (--check wins)
    mc_objects = 20000           # simulated selected objects per sample for the expected information
    distant = "meridian"         # the deepest sample (default: highest median redshift)
    local = "halden"             # the reference sample (default: lowest median redshift)
    anchor = "brisk"             # the degeneracy breaker: a sample of the plan, or a table (below)

A `[[sample]]` with a `path` is an existing catalogue kept as it is (keys as in a run
configuration: name, path, columns, method, selection, drop_invalid); its masses are redrawn from
the truth for the expected information and for the mocks. Every error is a ConfigError naming the
plan file and the key.
"""

from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from ..config import load_toml, parse_run_config
from ..data.readers import read_catalogs
from ..errors import ConfigError
from ..selection.compiled import build_selection
from ..simulation.plan import METHOD_ERRORS, parse_sim_config, parse_truth

FORECAST_KEYS = ("threshold_sigma", "check", "mc_objects", "distant", "local", "anchor")
FORECAST_DEFAULTS = {"threshold_sigma": 3.0, "check": 40, "mc_objects": 20000}
CATALOG_KEYS = ("name", "path", "columns", "method", "selection", "drop_invalid")
#: Smallest number of objects a planned sample may have (alpha, k and the scatter need three).
MIN_OBJECTS = 3
#: Smallest spread of the lever arm log10(1+z) over the whole plan (dex): below it k is not measurable.
MIN_LEVER_ARM = 0.01


@dataclass(frozen=True, eq=False)
class KeptSample:
    """An existing catalogue kept as it is (its design; masses are redrawn from the truth)."""

    name: str
    catalog: object      # data.catalog.Catalog of this sample only
    selection: tuple
    inputs: list         # provenance from read_catalogs

    @property
    def n(self):
        return len(self.catalog)

    @property
    def method(self):
        methods = self.catalog.method_names
        return methods[0] if len(methods) == 1 else "mixed"

    @property
    def median_z(self):
        return float(np.median(self.catalog.z))

    @property
    def z_range(self):
        return [float(self.catalog.z.min()), float(self.catalog.z.max())]


@dataclass(frozen=True, eq=False)
class ForecastPlan:
    """A validated plan.

    Attributes
    ----------
    sim_raw : dict, the simulator configuration of the simulated samples (no forecast tables)
    sim : simulation.plan.SimConfig, its validated form (samples may be empty)
    kept : tuple of KeptSample
    run_config : config.RunConfig, model options and priors the planned data would be fitted with
    sizes : dict, sample name -> planned number of objects, in plan order
    threshold_sigma, check, mc_objects : float, int, int
    distant, local : str, sample names
    anchor : str, the sample that breaks the k-offset degeneracy (see `choose_anchor`)
    anchor_table : dict or None, its [[sample]] table when it is not a sample of the plan
    source : str, the plan file
    """

    sim_raw: dict
    sim: object
    kept: tuple
    run_config: object
    sizes: dict
    threshold_sigma: float
    check: int
    mc_objects: int
    distant: str
    local: str
    anchor: str
    anchor_table: object
    source: str

    @property
    def truth(self):
        return self.sim.truth

    @property
    def cosmology(self):
        return self.sim.cosmology

    def median_z(self, name):
        """Median redshift of a sample (the middle of the range for a simulated one)."""
        for kept in self.kept:
            if kept.name == name:
                return kept.median_z
        spec = self.sim_spec(name)
        return 0.5 * (spec.z_lo + spec.z_hi)

    def sim_spec(self, name):
        """The simulator's SimulatedSample of a simulated sample, or None for a kept catalogue."""
        return next((spec for spec in self.sim.samples if spec.name == name), None)

    def method_of(self, name):
        spec = self.sim_spec(name)
        return spec.method if spec is not None else next(k.method for k in self.kept if k.name == name)

    def selections(self):
        """Sample name -> list of selection models (every sample, simulated and kept)."""
        out = {spec.name: list(spec.selection) for spec in self.sim.samples}
        out.update({kept.name: list(kept.selection) for kept in self.kept})
        return out

    def with_sample_tables(self, tables):
        """A copy whose simulated samples are `tables` (e.g. a deeper distant sample)."""
        raw = {**self.sim_raw, "sample": tables}
        return replace(self, sim_raw=raw, sim=parse_sim_config(raw))


def read_plan(path):
    """Read and validate a plan file (see the module note)."""
    raw = load_toml(path)
    try:
        return parse_plan(raw, base_dir=Path(path).parent, source=str(path))
    except ConfigError as exc:
        text = str(exc)
        raise ConfigError(text if text.startswith(str(path)) else f"{path}: {text}") from None


def parse_plan(raw, *, base_dir=Path("."), source="<plan>"):
    """Validate a parsed plan (dict) into a ForecastPlan."""
    if not isinstance(raw, dict):
        raise ConfigError(f"expected a table, got {type(raw).__name__}")
    raw = dict(raw)
    model_tables = {key: raw.pop(key) for key in ("model", "priors") if key in raw}
    options = _forecast_options(raw.pop("forecast", {}))
    tables = raw.get("sample")
    tables = [tables] if isinstance(tables, dict) else tables
    if not isinstance(tables, list) or not tables:
        raise ConfigError("sample: expected at least one [[sample]] table")
    kept_tables = [t for t in tables if isinstance(t, dict) and "path" in t]
    sim_tables = [t for t in tables if not (isinstance(t, dict) and "path" in t)]
    sim_raw = {**raw, "sample": sim_tables}
    sim = _parse_simulated(sim_raw)
    kept = tuple(_read_kept(table, i, base_dir) for i, table in enumerate(kept_tables))
    sizes = {}
    for table in tables:
        name = table.get("name") if isinstance(table, dict) else None
        if name in sizes:
            raise ConfigError(f"sample: duplicate name {name!r}")
        sizes[name] = (next(k.n for k in kept if k.name == name) if "path" in table
                       else int(table["n"]))
    for name, n in sizes.items():
        if n < MIN_OBJECTS:
            raise ConfigError(f"sample '{name}': key 'n': expected at least {MIN_OBJECTS} objects, got {n}")
    run_config = parse_run_config(model_tables, base_dir=base_dir, source=source)
    plan = ForecastPlan(sim_raw=sim_raw, sim=sim, kept=kept, run_config=run_config, sizes=sizes,
                        threshold_sigma=options["threshold_sigma"], check=options["check"],
                        mc_objects=options["mc_objects"], distant="", local="", anchor="",
                        anchor_table=None, source=source)
    distant, local = _extremes(plan, options)
    plan = replace(plan, distant=distant, local=local)
    _check_lever_arm(plan)
    if run_config.model.zero_point_method is None:  # fixed, so added samples keep the layout
        model = replace(run_config.model, zero_point_method=_main_method(plan, local))
        plan = replace(plan, run_config=replace(run_config, model=model))
    return choose_anchor(plan, options.get("anchor"))


def _parse_simulated(sim_raw):
    """The SimConfig of the simulated samples; a plan of catalogues only gets an empty sample list."""
    if sim_raw["sample"]:
        return parse_sim_config(sim_raw)
    placeholder = {"name": "_", "n": 1, "z_range": [0.0, 1.0], "method": "dynamical"}
    checked = parse_sim_config({**sim_raw, "truth": {}, "sample": [placeholder]})  # top-level keys
    return replace(checked, truth=parse_truth(sim_raw.get("truth")), samples=())


def _forecast_options(table):
    if not isinstance(table, dict):
        raise ConfigError(f"forecast: expected a table, got {table!r}")
    unknown = sorted(set(table) - set(FORECAST_KEYS))
    if unknown:
        raise ConfigError(f"forecast: unknown key {unknown[0]!r}; expected some of {', '.join(FORECAST_KEYS)}")
    options = {**FORECAST_DEFAULTS, **table}
    threshold = options["threshold_sigma"]
    if isinstance(threshold, bool) or not isinstance(threshold, (int, float)) or not 0 < threshold < 20:
        raise ConfigError(f"forecast.threshold_sigma: expected a number in (0, 20), got {threshold!r}")
    for key, low in (("check", 0), ("mc_objects", 500)):
        value = options[key]
        if isinstance(value, bool) or not isinstance(value, int) or value < low:
            raise ConfigError(f"forecast.{key}: expected an integer >= {low}, got {value!r}")
    options["threshold_sigma"] = float(threshold)
    return options


def _read_kept(table, index, base_dir):
    label = f"sample '{table.get('name', index)}'"
    unknown = sorted(set(table) - set(CATALOG_KEYS))
    if unknown:
        raise ConfigError(f"{label}: unknown key {unknown[0]!r} for a catalogue sample (one with "
                          f"'path'); expected some of {', '.join(CATALOG_KEYS)}")
    name = table.get("name")
    if not isinstance(name, str) or not name.strip():
        raise ConfigError(f"{label}: key 'name': expected a non-empty string, got {name!r}")
    path = Path(table["path"])
    path = path if path.is_absolute() else Path(base_dir) / path
    options = {"sample": name, "column_map": table.get("columns") or None,
               "drop_invalid": bool(table.get("drop_invalid", False)), "default_method": table.get("method")}
    catalog, inputs = read_catalogs([(path, options)])
    catalog = catalog.subset(catalog.sample == name)
    selection = build_selection(table.get("selection"), where=label)
    return KeptSample(name=name, catalog=catalog, selection=tuple(selection), inputs=inputs)


def _extremes(plan, options):
    """The distant (highest median z) and local (lowest median z) samples, or the named ones."""
    names = list(plan.sizes)
    chosen = []
    for key, pick in (("distant", max), ("local", min)):
        name = options.get(key)
        if name is None:
            name = pick(names, key=plan.median_z)
        elif name not in names:
            raise ConfigError(f"forecast.{key}: unknown sample {name!r}; expected one of {', '.join(names)}")
        chosen.append(name)
    return tuple(chosen)


def _check_lever_arm(plan):
    """An impossible plan: every object at (nearly) one redshift."""
    ranges = [plan.sim_spec(n) for n in plan.sizes]
    lows = [s.z_lo if s else k.z_range[0] for s, k in zip(ranges, _kept_by_name(plan))]
    highs = [s.z_hi if s else k.z_range[1] for s, k in zip(ranges, _kept_by_name(plan))]
    span = np.log10((1 + max(highs)) / (1 + min(lows)))
    if span < MIN_LEVER_ARM:
        raise ConfigError(f"sample: no redshift lever arm: every sample lies within z = {min(lows):g} to "
                          f"{max(highs):g} (log10(1+z) spans {span:.4f} dex, need >= {MIN_LEVER_ARM})")


def _main_method(plan, name):
    """The most common mass method of a sample (the fit's default zero point for the local one)."""
    kept = next((k for k in plan.kept if k.name == name), None)
    if kept is None:
        return plan.sim_spec(name).method
    methods, counts = np.unique(kept.catalog.method.astype(str), return_counts=True)
    return str(methods[np.argmax(counts)])


def _kept_by_name(plan):
    kept = {k.name: k for k in plan.kept}
    return [kept.get(name) for name in plan.sizes]


def lever_arm_of(plan, name):
    """log10(1 + median z) of a sample."""
    return float(np.log10(1.0 + plan.median_z(name)))


def choose_anchor(plan, option=None):
    """The degeneracy breaker: a local sample measured with the distant sample's method.

    `option` (forecast.anchor) names a sample of the plan, or is a [[sample]] table of a new one
    (see `anchor_table`). By default it is the lowest-redshift sample of the plan that uses the
    distant sample's method and whose median lever arm log10(1+z) is below a third of the distant
    sample's; without one, a new sample from `anchor_table`.
    """
    if isinstance(option, str):
        if option not in plan.sizes or option == plan.distant:
            raise ConfigError(f"forecast.anchor: expected a sample of the plan other than the distant "
                              f"one ({', '.join(n for n in plan.sizes if n != plan.distant)}), got {option!r}")
        return replace(plan, anchor=option)
    if option is None:
        method, reach = plan.method_of(plan.distant), lever_arm_of(plan, plan.distant) / 3.0
        found = [n for n in plan.sizes if n != plan.distant and plan.method_of(n) == method
                 and lever_arm_of(plan, n) < reach]
        if found:
            return replace(plan, anchor=min(found, key=plan.median_z))
    table = anchor_table(plan, option)
    return replace(plan, anchor=table["name"], anchor_table=table)


def anchor_table(plan, override=None):
    """The [[sample]] table of a new degeneracy breaker: a local sample measured with the distant
    sample's method. Defaults: the local sample's redshift and host-mass ranges, the distant
    sample's method and mass error, the local sample's host error, no selection; `override` (the
    plan's forecast.anchor table) replaces any of these keys."""
    distant = plan.sim_spec(plan.distant)
    local = plan.sim_spec(plan.local)
    method = plan.method_of(plan.distant)
    table = {"name": "anchor", "n": MIN_OBJECTS, "method": method}
    if distant is not None:
        table["log_mbh_err"] = distant.log_mbh_err
    elif method not in METHOD_ERRORS:
        kept = next(k for k in plan.kept if k.name == plan.distant)
        table["log_mbh_err"] = float(np.median(kept.catalog.log_mbh_err))
    if local is not None:
        table.update(z_range=[local.z_lo, local.z_hi], log_mstar_err=local.log_mstar_err,
                     log_mstar_min=local.log_mstar_min, log_mstar_max=local.log_mstar_max)
    else:
        kept = next(k for k in plan.kept if k.name == plan.local)
        table.update(z_range=kept.z_range, log_mstar_err=float(np.median(kept.catalog.log_mstar_err)))
    if override is not None:
        if not isinstance(override, dict):
            raise ConfigError(f"forecast.anchor: expected a table, got {override!r}")
        table.update({key: value for key, value in override.items() if key != "n"})
    if table.get("name") in plan.sizes:
        raise ConfigError(f"forecast.anchor: name {table['name']!r} is already a sample of the plan")
    truth = plan.truth.to_dict()
    if isinstance(truth["sigma_int"], dict):
        truth["sigma_int"] = {table["name"]: truth["sigma_int"].get(plan.local, 0.3)}
    parse_sim_config({**plan.sim_raw, "truth": truth, "sample": [table]})  # names a bad key
    return table
