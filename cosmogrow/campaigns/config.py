"""Campaign configuration: a TOML file parsed and validated once into a frozen object.

A campaign configuration looks like::

    seed = 7                       # optional; --seed wins; else chosen and recorded
    design = "run.toml"            # a run configuration: mocks of its data's own design
    # simulation = "sim.toml"      # ... or a simulator configuration (exactly one of the two)
    # fit = "run.toml"             # with `simulation`: the model/priors/sampler to fit with
    [grid]
    k = [-1, 0, 1, 2, 3, 4]        # injected k (default)
    realisations = 200             # mocks per injected k (default)
    [estimator]
    mode = "fast"                  # "fast" (MAP + Laplace), "importance" (its importance-sampled
                                   # correction to the exact posterior) or "mcmc" (as `cosmogrow fit`)
    compare_plain = false          # also fit every mock with the plain likelihood
    max_steps = 3000               # MCMC step cap per mock (campaign default, see replicas)
    [truth]                        # optional overrides of the design's truth (not k)
    sigma_int = 0.3
    [sbc]                          # optional simulation-based calibration
    n = 200                        # mocks with k drawn uniformly from `prior`
    prior = [-1.0, 4.0]
    draws = 99                     # posterior draws per mock (ranks 0..draws)

Paths are relative to the campaign file. Every error is a ConfigError naming the key.

Notes: in design mode the mocks' truth is the selection-aware MAP of the design's own data with k
replaced (then [truth] overrides); in simulation mode it is the simulator's [truth]. MCMC mode
runs each fit as `cosmogrow fit` does (walkers, autocorrelation rule of the run configuration)
but stops at `max_steps` (a capped chain is reported with converged = false). SBC mocks are
fitted with the run's own prior on k (default uniform on [-10, 10]); as long as the likelihood is
much narrower than both ranges, the ranks of a calibrated estimator are uniform.
"""

import math
from dataclasses import dataclass
from pathlib import Path

from ..config import load_toml
from ..errors import ConfigError
from .mocks import CAMPAIGN_MAX_STEPS, CAMPAIGN_MODES

DEFAULT_GRID = (-1.0, 0.0, 1.0, 2.0, 3.0, 4.0)
DEFAULT_REALISATIONS = 200
_TOP_KEYS = {"seed", "design", "simulation", "fit", "grid", "estimator", "truth", "sbc"}
_GRID_KEYS = {"k", "realisations"}
_ESTIMATOR_KEYS = {"mode", "compare_plain", "max_steps"}
_SBC_KEYS = {"n", "prior", "draws"}


@dataclass(frozen=True)
class SBCOptions:
    """Simulation-based calibration: `n` mocks, k ~ U(prior), `draws` posterior draws each."""

    n: int
    prior: tuple
    draws: int = 99


@dataclass(frozen=True)
class CampaignConfig:
    """Everything a campaign needs besides the design's data."""

    design: Path | None = None
    simulation: Path | None = None
    fit: Path | None = None
    grid: tuple = DEFAULT_GRID
    realisations: int = DEFAULT_REALISATIONS
    mode: str = "fast"
    compare_plain: bool = False
    max_steps: int = CAMPAIGN_MAX_STEPS
    truth: tuple = ()          # (name, value) pairs, kept hashable
    sbc: SBCOptions | None = None
    seed: int | None = None
    source: str = "<campaign>"

    @property
    def truth_overrides(self):
        return dict(self.truth)

    def with_seed(self, seed):
        from dataclasses import replace

        return self if seed is None else replace(self, seed=_check_seed(seed, "--seed", self.source))

    def to_dict(self):
        """JSON-friendly description (paths as given, resolved)."""
        return {"source": self.source, "seed": self.seed,
                "design": str(self.design) if self.design else None,
                "simulation": str(self.simulation) if self.simulation else None,
                "fit": str(self.fit) if self.fit else None,
                "grid": {"k": list(self.grid), "realisations": self.realisations},
                "estimator": {"mode": self.mode, "compare_plain": self.compare_plain,
                              "max_steps": self.max_steps},
                "truth": self.truth_overrides,
                "sbc": None if self.sbc is None else {"n": self.sbc.n, "prior": list(self.sbc.prior),
                                                      "draws": self.sbc.draws}}


def read_campaign_config(path):
    """Read and validate a campaign configuration file."""
    return parse_campaign_config(load_toml(path), base_dir=Path(path).parent, source=str(path))


def parse_campaign_config(raw, *, base_dir=Path("."), source="<campaign>"):
    """Validate a parsed TOML mapping and build a CampaignConfig."""
    _check_keys(raw, _TOP_KEYS, "", source)
    has_design, has_sim = "design" in raw, "simulation" in raw
    if has_design == has_sim:
        raise ConfigError(f"{source}: design: give exactly one of 'design' (a run configuration) "
                          f"or 'simulation' (a simulator configuration)")
    paths = {}
    for key in ("design", "simulation", "fit"):
        if key in raw:
            paths[key] = _path(raw[key], key, base_dir, source)
    if "fit" in raw and not has_sim:
        raise ConfigError(f"{source}: fit: only used with 'simulation' (a design's own run "
                          f"configuration is its fit configuration)")
    grid = raw.get("grid", {})
    _check_keys(grid, _GRID_KEYS, "grid.", source)
    k_values = grid.get("k", list(DEFAULT_GRID))
    if (not isinstance(k_values, list) or not k_values
            or not all(_is_number(k) for k in k_values)):
        raise ConfigError(f"{source}: grid.k: expected a non-empty list of finite numbers, got {k_values!r}")
    if len(set(k_values)) != len(k_values):
        raise ConfigError(f"{source}: grid.k: expected distinct values, got {k_values!r}")
    realisations = _integer(grid.get("realisations", DEFAULT_REALISATIONS), "grid.realisations",
                            0, source)
    estimator = raw.get("estimator", {})
    _check_keys(estimator, _ESTIMATOR_KEYS, "estimator.", source)
    mode = estimator.get("mode", "fast")
    if mode not in CAMPAIGN_MODES:
        raise ConfigError(f"{source}: estimator.mode: expected one of {', '.join(CAMPAIGN_MODES)}, "
                          f"got {mode!r}")
    compare_plain = estimator.get("compare_plain", False)
    if not isinstance(compare_plain, bool):
        raise ConfigError(f"{source}: estimator.compare_plain: expected true or false, "
                          f"got {compare_plain!r}")
    max_steps = _integer(estimator.get("max_steps", CAMPAIGN_MAX_STEPS), "estimator.max_steps",
                         100, source)
    truth = raw.get("truth", {})
    _check_keys(truth, set(truth), "truth.", source)  # a table; names are checked against the design
    if "k" in truth:
        raise ConfigError(f"{source}: truth.k: k is injected from grid.k (or the sbc prior), "
                          f"not set in [truth]")
    sbc = _parse_sbc(raw["sbc"], source) if "sbc" in raw else None
    if realisations == 0 and sbc is None:
        raise ConfigError(f"{source}: grid.realisations: expected >= 1 when there is no [sbc] table, "
                          f"got 0")
    seed = raw.get("seed")
    if seed is not None:
        seed = _check_seed(seed, "seed", source)
    return CampaignConfig(design=paths.get("design"), simulation=paths.get("simulation"),
                          fit=paths.get("fit"), grid=tuple(float(k) for k in k_values),
                          realisations=realisations, mode=mode, compare_plain=compare_plain,
                          max_steps=max_steps, truth=tuple(sorted(_freeze(truth).items())),
                          sbc=sbc, seed=seed, source=source)


def _parse_sbc(table, source):
    _check_keys(table, _SBC_KEYS, "sbc.", source)
    n = _integer(table.get("n", 200), "sbc.n", 1, source)
    prior = table.get("prior")
    if (not isinstance(prior, list) or len(prior) != 2 or not all(_is_number(p) for p in prior)
            or not prior[0] < prior[1]):
        raise ConfigError(f"{source}: sbc.prior: expected [low, high] with low < high, got {prior!r}")
    draws = _integer(table.get("draws", 99), "sbc.draws", 9, source)
    return SBCOptions(n=n, prior=(float(prior[0]), float(prior[1])), draws=draws)


def _freeze(table):
    return {key: (tuple(sorted(value.items())) if isinstance(value, dict) else value)
            for key, value in table.items()}


def thaw_truth(pairs):
    """The [truth] overrides as plain dicts (inverse of the frozen form kept in the config)."""
    return {key: (dict(value) if isinstance(value, tuple) else value) for key, value in pairs}


def _path(value, key, base_dir, source):
    if not isinstance(value, str) or not value:
        raise ConfigError(f"{source}: {key}: expected a file path, got {value!r}")
    path = Path(value)
    path = path if path.is_absolute() else Path(base_dir) / path
    if not path.is_file():
        raise ConfigError(f"{source}: {key}: file not found: {path}")
    return path


def _integer(value, key, minimum, source):
    if isinstance(value, bool) or not isinstance(value, int) or value < minimum:
        raise ConfigError(f"{source}: {key}: expected an integer >= {minimum}, got {value!r}")
    return value


def _check_seed(value, key, source):
    if isinstance(value, bool) or not isinstance(value, int) or value < 0:
        raise ConfigError(f"{source}: {key}: expected a non-negative integer, got {value!r}")
    return value


def _is_number(value):
    """A finite int or float (not a boolean)."""
    return isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)


def _check_keys(table, allowed, prefix, source):
    if not isinstance(table, dict):
        raise ConfigError(f"{source}: {prefix.rstrip('.') or 'campaign'}: expected a table, "
                          f"got {table!r}")
    unknown = sorted(set(table) - set(allowed))
    if unknown:
        raise ConfigError(f"{source}: unknown key '{prefix}{unknown[0]}'; expected one of "
                          f"{', '.join(sorted(allowed))}")
