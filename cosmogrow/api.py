"""The Python entry points for notebooks and scripts: configure a run, fit it, simulate, calibrate.

Every function here composes the same pieces the command line uses, so a fit from DataFrames in a
notebook gives the same numbers as `cosmogrow fit` on the same catalogues written to files.
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

from .config import RunConfig, parse_run_config


def run_config(samples=(), *, model: dict | None = None, priors: dict | None = None,
               sampler: dict | None = None, cosmology: dict | None = None, seed: int | None = None,
               verdicts: dict | None = None, crosscheck: dict | None = None) -> RunConfig:
    """A validated run configuration, the Python form of a run TOML file.

    Parameters
    ----------
    samples : sequence of dict
        One dict per sample with the keys of a ``[[sample]]`` table (name, method, selection,
        columns, drop_invalid) and its catalogue as ``data``: a pandas DataFrame in the catalogue
        format (masses in log10 Msun, errors in dex) or a path to a catalogue file.
    model, priors, sampler, cosmology, verdicts, crosscheck : dict, optional
        The tables of a run configuration (see the README's configuration section).
    seed : int, optional

    Returns
    -------
    RunConfig
        Frames are kept in memory and validated when the data are loaded, with the same one-line
        errors as files (naming the frame, row, column and value).
    """
    import pandas as pd

    from .data.frames import FrameSource
    from .errors import ConfigError

    entries, frames = [], {}
    for index, sample in enumerate(samples):
        entry = dict(sample)
        if "data" not in entry:
            raise ConfigError(f"sample[{index + 1}]: missing key 'data' (a DataFrame or a catalogue path)")
        data = entry.pop("data")
        if isinstance(data, pd.DataFrame):
            name = entry.get("name")
            if not isinstance(name, str) or not name:
                raise ConfigError(f"sample[{index + 1}]: a DataFrame sample needs a 'name'")
            frames[index] = FrameSource(name, data)
            data = name
        entries.append({**entry, "path": str(data)})
    raw = {key: value for key, value in (("model", model), ("priors", priors), ("sampler", sampler),
                                         ("cosmology", cosmology), ("verdicts", verdicts),
                                         ("crosscheck", crosscheck), ("seed", seed)) if value is not None}
    raw["sample"] = entries
    config = parse_run_config(raw, base_dir=Path("."), source="run configuration")
    specs = tuple(replace(spec, path=frames[i]) if i in frames else spec
                  for i, spec in enumerate(config.samples))
    return replace(config, samples=specs)


def fit(config: RunConfig, *, selection_aware: bool = True, claims=(), threshold: float | None = None,
        chain_path=None):
    """Fit k: read the catalogues, MAP, Laplace, MCMC to convergence, verdicts.

    Parameters
    ----------
    config : RunConfig, from `run_config` or `config.read_run_config`; without a seed, seed 0 is used
        (the command line draws and records a fresh one instead), so a notebook rerun repeats itself
    selection_aware : bool, model each sample's declared selection (default True)
    claims : sequence of float, values of k to give verdicts on besides 0 and 3
    threshold : float, optional; the verdict threshold in σ (default 3, or the configuration's)
    chain_path : path, optional; an HDF5 file to keep the chain in

    Returns
    -------
    inference.fit.FitResult
        ``summary`` holds what summary.json holds (k, verdicts, sensitivity, tests, …);
        ``chain`` the posterior draws; ``model`` the likelihood.
    """
    from .inference.fit import load_data, run_fit
    from .inference.verdicts import verdict_options

    if config.seed is None:
        config = config.with_overrides(seed=0)
    data = load_data(config)
    verdicts = verdict_options(config.raw.get("verdicts", {}), config.source,
                               claims=list(claims) or None, threshold=threshold)
    return run_fit(config, data, selection_aware=selection_aware, verdicts=verdicts, chain_path=chain_path)


def simulate(plan: dict | str | Path, *, seed: int | None = None):
    """Mock catalogues of a simulator configuration (a dict of its tables, or a TOML path).

    Returns
    -------
    simulation.population.SimulationResult
        Its catalogue and truth (see `cosmogrow simulate`).
    """
    from .config import load_toml
    from .simulation.population import simulate_population

    table = load_toml(plan) if isinstance(plan, (str, Path)) else plan
    return simulate_population(table, seed=seed)


def calibrate(campaign_toml: str | Path, out: str | Path, *, workers: int | None = 1):
    """Run (or resume) an injection-recovery campaign described by a campaign TOML file.

    Parameters
    ----------
    campaign_toml : path of the campaign configuration
    out : results folder (journal, results.parquet-ready rows)
    workers : int, worker processes (1: one spawned worker; None: every core)

    Returns
    -------
    campaigns.runner.CampaignResult
    """
    from .campaigns.config import read_campaign_config
    from .campaigns.executors import make_executor
    from .campaigns.runner import prepare_campaign, run_campaign

    executor = make_executor(workers=workers)
    try:
        return run_campaign(prepare_campaign(read_campaign_config(campaign_toml)), Path(out), executor)
    finally:
        executor.close()
