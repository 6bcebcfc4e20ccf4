"""The true parameters behind a mock: one frozen `Truth`, validated once at construction.

The simulator's [truth] table, a design's fitted parameters with k replaced (campaigns, null
tests, the challenge) and a truth.json record all become a `Truth` (`parse_truth`), which is then
passed as an object: replacing k for a job is ``dataclasses.replace(truth, k=...)``.

Parameters (the model's names, docs/method.md#model; defaults in brackets): k [0]; alpha [8.69,
log10 M_BH at M* = 1e11 Msun from the Kormendy & Ho 2013 M-M_bulge relation, 0.49e9 Msun, taking
M_bulge = M*]; beta [1, the ratio form]; sigma_int [0.28 dex, the scatter of that relation; or
{sample: dex}]; gamma [0]; s_pivot [11.0 log10 Msun]; z_ref [0]; delta [{}: method -> measurement
offset, dex; unlisted methods 0]; delta_host [{}: host type -> shift of the latent mass, dex;
unlisted types 0]; f_out [0]; sigma_out [1.0 dex]; host_priors [None: {sample: (mean, variance)} of
the parent true hosts of selected samples, as a fit estimated them].
"""

from dataclasses import dataclass, field, fields

from .. import validate
from ..errors import ConfigError

TRUTH_DEFAULTS = {"k": 0.0, "alpha": 8.69, "beta": 1.0, "sigma_int": 0.28, "gamma": 0.0,
                  "s_pivot": 11.0, "z_ref": 0.0, "f_out": 0.0, "sigma_out": 1.0}
#: Keys of a truth record written by the simulator that are not parameters.
TRUTH_META_KEYS = ("seed", "cosmology", "mass_function", "samples", "cosmogrow_version")
_BOUNDS = {"sigma_int": {"low": 0}, "f_out": {"low": 0, "high": 0.99},
           "sigma_out": {"low": 0, "low_open": True}, "z_ref": {"low": 0}}
_TABLES = {"delta": "method", "delta_host": "host type"}


def finite_number(value, label, *, low=None, high=None, low_open=False) -> float:
    """`value` as a float; ConfigError "label: expected a finite number [bounds], got value"."""
    return validate.number(value, label, low=low, high=high, low_open=low_open)


@dataclass(frozen=True)
class Truth:
    """True parameters of a simulation (module note: meanings, units, defaults).

    Mappings (sigma_int per sample, delta, delta_host, host_priors) are copied at construction;
    treat them as read-only and derive a changed truth with `dataclasses.replace` or
    `with_overrides`.

    Raises
    ------
    ConfigError
        A value that is not a finite number or lies outside its range, naming ``truth.<key>``.
    """

    k: float = 0.0
    alpha: float = 8.69
    beta: float = 1.0
    sigma_int: float | dict = 0.28
    gamma: float = 0.0
    s_pivot: float = 11.0
    z_ref: float = 0.0
    delta: dict = field(default_factory=dict)
    f_out: float = 0.0
    sigma_out: float = 1.0
    delta_host: dict = field(default_factory=dict)
    host_priors: dict | None = None

    def __post_init__(self):
        for name in TRUTH_DEFAULTS:
            value = getattr(self, name)
            if name == "sigma_int" and isinstance(value, dict):
                value = {s: finite_number(v, f"truth.sigma_int.{s}", low=0) for s, v in value.items()}
            else:
                value = finite_number(value, f"truth.{name}", **_BOUNDS.get(name, {}))
            object.__setattr__(self, name, value)
        for name, label in _TABLES.items():
            table = getattr(self, name)
            if not isinstance(table, dict):
                raise ConfigError(f"truth.{name}: expected a table {label} -> offset (dex), got {table!r}")
            object.__setattr__(self, name, {m: finite_number(v, f"truth.{name}.{m}") for m, v in table.items()})
        if self.host_priors is not None:
            object.__setattr__(self, "host_priors", {
                s: (finite_number(p[0], f"truth.host_priors.{s}"),
                    finite_number(p[1], f"truth.host_priors.{s}", low=0, low_open=True))
                for s, p in dict(self.host_priors).items()})

    def scatter_of(self, sample: str) -> float:
        """Intrinsic scatter (dex) of a sample."""
        if isinstance(self.sigma_int, dict):
            if sample not in self.sigma_int:
                raise ConfigError(f"truth.sigma_int: no value for sample '{sample}'; "
                                  f"given for {', '.join(self.sigma_int)}")
            return self.sigma_int[sample]
        return self.sigma_int

    def offset_of(self, method: str) -> float:
        """Mass-method offset (dex); 0 for a method not listed."""
        return self.delta.get(method, 0.0)

    def host_offset_of(self, host_type: str) -> float:
        """Host-type shift of the latent black-hole mass (dex); 0 for a type not listed."""
        return self.delta_host.get(host_type, 0.0)

    def to_dict(self, *, exclude: tuple = ()) -> dict:
        """Nested JSON-friendly form, like a [truth] table (host_priors only when set)."""
        out = {}
        for item in fields(self):
            value = getattr(self, item.name)
            if item.name in exclude or (item.name == "host_priors" and value is None):
                continue
            if item.name == "host_priors":
                value = {s: list(p) for s, p in value.items()}
            out[item.name] = dict(value) if isinstance(value, dict) else value
        return out

    def with_overrides(self, overrides: dict | None) -> "Truth":
        """A copy with user overrides (a [truth] table): tables are merged, a number given for a
        per-sample table applies to every sample.

        Raises
        ------
        ConfigError
            A name that is not a parameter, or a label the truth's table does not have.
        """
        values = self.to_dict()
        names = [item.name for item in fields(self)]
        for key, value in (overrides or {}).items():
            if key not in names:
                raise ConfigError(f"truth.{key}: unknown parameter; expected one of {', '.join(names)}")
            current = values.get(key)
            if isinstance(current, dict) and isinstance(value, dict):
                unknown = sorted(set(value) - set(current))
                if unknown and current:  # an empty table (no offsets given) accepts any name
                    raise ConfigError(f"truth.{key}.{unknown[0]}: unknown name; expected one of "
                                      f"{', '.join(current)}")
                current.update(value)
            elif isinstance(current, dict):
                values[key] = {name: value for name in current}
            else:
                values[key] = value
        return Truth(**values)


def parse_truth(table) -> Truth:
    """A Truth from a [truth] table, a truth record written by the simulator, or a Truth (returned
    as it is). Flat keys "delta[<method>]", "delta_host[<type>]" and "sigma_int[<sample>]" are
    accepted beside the tables.

    Raises
    ------
    ConfigError
        An unknown key or a bad value, naming ``truth.<key>``.
    """
    if isinstance(table, Truth):
        return table
    if table is None:
        table = {}
    if not isinstance(table, dict):
        raise ConfigError(f"truth: expected a table, got {table!r}")
    values = {"delta": {}, "delta_host": {}}
    for key, value in table.items():
        if key in TRUTH_META_KEYS:
            continue
        flat = next((name for name in ("delta", "delta_host", "sigma_int")
                     if key.startswith(name + "[") and key.endswith("]")), None)
        if flat == "sigma_int":
            if not isinstance(values.get("sigma_int"), dict):
                values["sigma_int"] = {}
            values["sigma_int"][key[len(flat) + 1:-1]] = value
        elif flat:
            values[flat][key[len(flat) + 1:-1]] = value
        elif key in _TABLES:
            if not isinstance(value, dict):
                raise ConfigError(f"truth.{key}: expected a table {_TABLES[key]} -> offset (dex), "
                                  f"got {value!r}")
            values[key].update(value)
        elif key in TRUTH_DEFAULTS or key == "host_priors":
            values[key] = dict(value) if isinstance(value, dict) else value
        else:
            valid = ", ".join([*TRUTH_DEFAULTS, *_TABLES])
            raise ConfigError(f"truth: unknown key {key!r}; expected some of {valid}")
    return Truth(**values)
