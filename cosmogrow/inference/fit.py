"""A fit from configuration to results: read, build the model, MAP, MCMC, summary.

Nothing here prints or draws; the fit command writes the files and the report layer the plots.
"""

from dataclasses import dataclass

import numpy as np

from .. import background
from ..data.catalog import Catalog
from ..data.readers import MAP_TARGETS, read_catalogs
from .crosscheck import crosscheck_options, crosscheck_warnings, run_crosscheck
from ..config import check_against_data
from ..errors import ConfigError
from .k_estimate import sample_posterior
from .laplace import find_map, laplace
from ..model.hostprior import parent_host_priors
from ..model.likelihood import CoupledGrowthModel, build_design
from ..outputs import StageTimes, package_versions
from ..validate import in_file
from ..selection.compiled import SelectionSet, build_selection
from .summary import (convergence_block, degeneracy_warnings, describe_parameters,
                      describe_samples, hypothesis_tests, offset_sensitivity)
from .guards import identifiability, identifiability_warning, undeclared_methods_warning
from .forked import BESIDE_MIN_OBJECTS, Beside
from .information import describe_information
from .sensitivity import common_width, offset_subject, sensitivity_rows, significance_block
from .verdicts import headline, verdict_options, verdicts_from_rows
from ..seeding import child_seed


@dataclass(frozen=True, eq=False)
class FitData:
    """Catalogue, per-file provenance and compiled selection of a run."""

    catalog: Catalog
    files: list
    selections: dict   # sample name -> list of selection models
    cosmology: object


@dataclass(frozen=True, eq=False)
class FitResult:
    """Everything a fit produced."""

    model: CoupledGrowthModel
    laplace: object
    chain: object
    summary: dict


def load_data(config) -> FitData:
    """Read every sample's catalogue and its selection; duplicate ids across files are an error.

    Configuration errors (selection, cosmology, column names, names that must match the data)
    name the configuration file and stop the run before the MAP and the MCMC.
    """
    with in_file(config.source):
        if not config.samples:
            raise ConfigError("no catalogues given (list them on the command line or as [[sample]] tables)")
        cosmology = background.get_cosmology(config.cosmology, deferred=True)
        crosscheck_options(config.raw.get("crosscheck", {}), config.source)  # fail before the MCMC
        verdict_options(config.raw.get("verdicts", {}), config.source)
        built = [list(build_selection(list(spec.selection), where=f"sample[{i + 1}]"))
                 for i, spec in enumerate(config.samples)]
        for i, spec in enumerate(config.samples):
            unknown = sorted(set(spec.columns.values()) - set(MAP_TARGETS))
            if unknown:
                raise ConfigError(f"sample[{i + 1}].columns: unknown target column {unknown[0]!r}; "
                                  f"expected one of {', '.join(MAP_TARGETS)}")
        entries = [(spec.path, {"sample": spec.name, "column_map": spec.columns or None,
                                "drop_invalid": spec.drop_invalid, "default_method": spec.method})
                   for spec in config.samples]
        catalog, files = read_catalogs(entries)
        check_against_data(config, catalog.method_names, catalog.sample_names,
                           tuple(h for h in catalog.host_type_names if h != "unspecified"))
        selections = {}
        for models, info in zip(built, files):
            for name in info["samples"]:
                if name in selections and selections[name] != models:
                    raise ConfigError(f"sample '{name}' appears in two files with different selections")
                selections[name] = models
    return FitData(catalog=catalog, files=files, selections=selections, cosmology=cosmology)


def build_model(config, data: FitData, *, selection_aware: bool = True, catalog: Catalog | None = None,
                selection_source: Catalog | None = None, host_rounds: int = 2) -> CoupledGrowthModel:
    """The posterior of a run; `catalog` replaces the data's rows (mocks of the same design).

    `selection_source` (same rows as `catalog`) is the catalogue the selection is compiled on, for
    null tests that move rows to other redshifts or samples but keep each row's selection; a
    sample of `catalog` then counts as selected when any of its rows comes from a selected sample.
    With selection and calibrated host errors, the parent host distribution of every selected
    sample is estimated in `host_rounds` alternations with the MAP (hostprior module); the
    resulting priors are kept on the model as `host_priors`.
    """
    catalog = data.catalog if catalog is None else catalog
    source = catalog if selection_source is None else selection_source
    selection = None
    if selection_aware and any(data.selections.values()):
        selection = SelectionSet.compile(data.selections, source, data.cosmology)
    model = CoupledGrowthModel(build_design(catalog, config.model), config.model, config.priors, selection)
    if model.selection is None or config.model.host_errors != "calibrated":
        return model
    cut = [name for name, models in data.selections.items() if any(m.on != "host" for m in models)]
    selected = list(dict.fromkeys(catalog.sample[np.isin(source.sample, cut)].tolist()))
    theta, priors = None, None
    for _ in range(host_rounds):
        theta, _, _ = find_map(model, theta)
        priors = parent_host_priors(model, catalog, theta, selected, config.model.log_mstar_pivot, priors)
        model = CoupledGrowthModel(build_design(catalog, config.model, priors), config.model,
                                   config.priors, selection, host_priors=priors, map_start=theta)
    return model


def run_fit(config, data: FitData, *, chain_path=None, on_check=None, selection_aware: bool = True,
            verdicts: dict | None = None, chain_attrs: dict | None = None, timer: StageTimes | None = None,
            on_sampled=None, parallel: bool = False) -> FitResult:
    """MAP, Laplace, MCMC and the summary of one run (`chain_attrs`: see inference.resume).

    Parameters
    ----------
    config : config.RunConfig (its seed seeds the walkers and the sampler)
    data : FitData
    chain_path : path, optional; HDF5 chain, resumed when it exists
    on_check : callable(step, tau_max, converged), optional progress hook
    selection_aware : bool, model the declared selection
    verdicts : dict {threshold, k_refs} from `verdicts.verdict_options`, optional; default the
        configuration's `[verdicts]` table

    `on_sampled(model, chain)`, optional, is called when the chain ends, before the summary (the
    command line starts drawing figures then). `timer` (outputs.StageTimes, optional) receives the
    seconds of the stages "map" (model, parent host priors, MAP and Hessian), "sampling",
    "sensitivity", "verdicts", "significance" and "crosscheck".

    With `parallel` (the command line sets it; forked processes are no place for a notebook's
    threads) and a catalogue of at least `forked.BESIDE_MIN_OBJECTS` objects, work that needs no
    result of the stages before it runs in a forked second process (`inference.forked.Beside`): the
    cross-check while the parent finds the MAP and samples, and half of the verdicts' profile fits;
    from `forked.HALVES_MIN_OBJECTS` objects a second process evaluates half of the walkers of every
    sampler step (`forked.Halves`). The results are those of the serial run.

    Returns
    -------
    FitResult
    """
    timer = StageTimes() if timer is None else timer
    # needs only the catalogue: beside the MAP and the sampling, or here before the figures are drawn
    pending = Beside(run_crosscheck, config, data.catalog,
                     enabled=parallel and len(data.catalog.z) >= BESIDE_MIN_OBJECTS)
    try:
        with timer.stage("map"):
            model = build_model(config, data, selection_aware=selection_aware)
            approx = laplace(model)
        if not pending.forked:
            with timer.stage("crosscheck"):
                crosscheck, _ = pending.result()
        with timer.stage("sampling"):
            chain = sample_posterior(model, approx, config.sampler, seed=config.seed, chain_path=chain_path,
                                     on_check=on_check, chain_attrs=chain_attrs, parallel=parallel)
        if pending.forked:
            with timer.stage("crosscheck"):  # the wait only; its own seconds are listed beside
                crosscheck, seconds = pending.result()
            timer.beside("crosscheck", seconds)
    finally:
        pending.close()
    if on_sampled is not None:
        on_sampled(model, chain)
    summary = summarise(config, data, model, approx, chain, verdicts, timer, crosscheck, parallel=parallel)
    return FitResult(model=model, laplace=approx, chain=chain, summary=summary)


def summarise(config, data: FitData, model: CoupledGrowthModel, approx, chain,
              verdicts: dict | None = None, timer: StageTimes | None = None,
              crosscheck: dict | None = None, parallel: bool = False) -> dict:
    """The summary.json content of a fit (`timer` collects the stages' wall times; `crosscheck`, the
    result of `run_crosscheck` when already computed; `parallel`: see `run_fit`)."""
    timer = StageTimes() if timer is None else timer
    with timer.stage("sensitivity"):
        sensitivity = offset_sensitivity(model, approx)
    warnings = degeneracy_warnings(model, data.catalog, approx, sensitivity)
    with timer.stage("verdicts"):
        judged = assess(config, data, model, approx, chain, verdicts, parallel=parallel, timer=timer)
    warnings = [line for line in judged.pop("warnings") if line] + warnings
    if not chain.converged:
        warnings.insert(0, f"the chain did not converge: {chain.n_steps} steps is "
                           f"{chain.n_steps / chain.tau_max:.1f} autocorrelation times, "
                           f"{config.sampler.autocorr_factor:g} required")
    if not model.selection and any(data.selections.values()):
        warnings.append("selection is declared but not modelled in this fit (plain likelihood)")
    failing = getattr(model.selection, "rows_failing_hard_cuts", ())
    if len(failing):
        ids = ", ".join(str(i) for i in data.catalog.ids[failing[:5]])
        warnings.append(f"{len(failing)} object(s) lie below a declared hard cut on the observed mass "
                        f"(e.g. {ids}): the declared selection does not describe these data")
    if not any(data.selections.values()):
        warnings.append("no selection is declared for any sample: k is only as good as the "
                        "assumption that the samples were not selected on black-hole mass")
    k_summary = describe_samples(chain.samples[:, model.index_k])
    if crosscheck is None:
        with timer.stage("crosscheck"):
            crosscheck = run_crosscheck(config, data.catalog)
    warnings += crosscheck_warnings(crosscheck, k_summary)
    with timer.stage("significance"):
        tests = hypothesis_tests(model, chain, judged["significance"])
    return {
        "k": k_summary,
        "headline": judged["headline"],
        "verdicts": judged["verdicts"],
        "tests": tests,
        "sensitivity": judged["sensitivity"],
        "information": judged["information"],
        "identifiability": judged["identifiability"],
        "convergence": convergence_block(chain, config.sampler.autocorr_factor),
        "parameters": describe_parameters(model.names, chain.samples),
        "map": {"theta": dict(zip(model.names, approx.theta)), "log_prob": approx.log_prob,
                "laplace_std": dict(zip(model.names, approx.std))},
        "degeneracy": {"offset_prior_sensitivity": sensitivity},
        "selection": {"corrected": model.selection is not None,
                      "samples": {name: [m.to_dict() for m in models]
                                  for name, models in data.selections.items()},
                      "parent_host_priors": {name: {"mean": mean, "std": float(np.sqrt(var))}
                                             for name, (mean, var) in
                                             model.host_priors.items()}},
        "crosscheck": crosscheck,
        "warnings": warnings,
        "data": data_overview(data.catalog),
        "inputs": data.files,
        "cosmology": background.describe(data.cosmology),
        "config": config.to_dict(),
        "seed": config.seed,
        "versions": package_versions(),
    }


def assess(config, data: FitData, model: CoupledGrowthModel, approx, chain,
           verdicts: dict | None = None, *, parallel: bool = False, timer: StageTimes | None = None) -> dict:
    """Significances, sensitivity rows, verdicts, information shares and identifiability of a fit
    (docs/method.md#verdicts; `parallel`, `timer`: see `run_fit`)."""
    options = verdicts or verdict_options(config.raw.get("verdicts", {}), config.source)
    k_draws = chain.samples[:, model.index_k]
    rows = sensitivity_rows(model, approx, k_draws, options["k_refs"], seed=child_seed(config.seed, 2),
                            parallel=parallel, timer=timer)
    judged = verdicts_from_rows(rows, options["k_refs"], options["threshold"], common_width(model),
                                offset_subject(model))
    guard = identifiability(k_draws, model.priors["k"], data.catalog.z)
    return {"significance": significance_block(rows, model), "sensitivity": rows,
            "verdicts": judged, "headline": headline(judged),
            "information": describe_information(model, approx, data.catalog),
            "identifiability": guard,
            "warnings": [identifiability_warning(guard), undeclared_methods_warning(data.catalog)]}


def data_overview(catalog: Catalog) -> dict:
    """Per-sample counts, redshift and mass ranges, methods."""
    rows = {}
    for name in catalog.sample_names:
        sel = catalog.sample == name
        rows[name] = {"n": int(sel.sum()), "z_median": float(np.median(catalog.z[sel])),
                      "z_range": [float(catalog.z[sel].min()), float(catalog.z[sel].max())],
                      "log_mbh_median": float(np.median(catalog.log_mbh[sel])),
                      "log_mstar_median": float(np.median(catalog.log_mstar[sel])),
                      "methods": sorted(set(catalog.method[sel].tolist()))}
    return rows
