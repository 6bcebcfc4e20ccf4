"""Injection-recovery campaigns and simulation-based calibration (docs/method.md#calibration).

A campaign simulates mocks of one design for every injected k on a grid (and, optionally, for k
drawn from a prior: SBC), fits each mock exactly like the data, journals every finished job, and
reduces the results to calibration statistics (`cosmogrow.campaigns.coverage`).

Jobs are ("grid", grid index, realisation) and ("sbc", 0, draw index); job (g, r) is seeded by
``child_seed(campaign_seed, g, r)`` (SBC jobs by ``child_seed(campaign_seed, SBC_INDEX, i)``), so a
row depends only on the campaign and its indices: not on the executor, the worker count, the
completion order or an interruption. Each job fits its one mock with every estimator of the
campaign (selection-aware, and plain when compared) with the same seeds.
"""

import hashlib
import json
import time
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
import pandas as pd

from . import coverage as calibration
from .config import thaw_truth
from ..config import RunConfig, read_run_config
from ..errors import ConfigError, CosmogrowError
from ..inference.laplace import laplace
from ..inference.fit import build_model, load_data
from .journal import Journal
from ..validate import in_file
from ..outputs import package_versions, sha256_file
from ..model.truth import Truth
from .mocks import design_truth, draw_replica, draw_simulated, fit_replica, simulation_design
from ..seeding import child_seed, child_seeds

JOURNAL = "journal.jsonl"
STAMP = "campaign.json"
#: Grid index of simulation-based-calibration jobs in the seed tree (grid points use 0, 1, ...).
SBC_INDEX = 1_000_000
AWARE, PLAIN = "selection-aware", "plain"
COLUMNS = ("kind", "grid_index", "realisation", "estimator", "k_true", "k_estimate", "k_std",
           "lo68", "hi68", "lo95", "hi95", "covered68", "covered95", "converged", "tau_max",
           "n_steps", "path", "ess_fraction", "sbc_rank", "n_draws", "n_objects", "seed_entropy",
           "spawn_key", "error")
_KIND_ORDER = {"grid": 0, "sbc": 1}
_FIT_FAILURES = (CosmogrowError, ValueError, ArithmeticError, np.linalg.LinAlgError)


@dataclass(frozen=True, eq=False)
class CampaignContext:
    """What every worker needs: shipped once per worker.

    Attributes
    ----------
    spec : CampaignConfig (with its seed resolved)
    run_config : RunConfig, how every mock is fitted
    data : fit.FitData, the design: catalogue (design mode), selections and cosmology
    truth : Truth of the mocks (k replaced per job)
    sim_config : simulation.population.Simulator (simulation mode) or None
    estimators : tuple of (name, selection_aware)
    """

    spec: object
    run_config: RunConfig
    data: object
    truth: Truth
    sim_config: object
    estimators: tuple
    notes: tuple = ()


@dataclass(frozen=True, eq=False)
class CampaignResult:
    results: pd.DataFrame
    summary: dict


def prepare_campaign(spec):
    """Load the design and derive the truth table; raises ConfigError/InputError on bad input."""
    if spec.design is not None:
        run_config = read_run_config(spec.design)
        data = load_data(run_config)
        model = build_model(run_config, data, selection_aware=True)
        truth = design_truth(model, laplace(model).theta, 0.0)
        sim_config = None
    else:
        run_config = read_run_config(spec.fit) if spec.fit is not None else RunConfig()
        with in_file(spec.simulation):
            sim_config, data, truth = simulation_design(spec.simulation)
    with in_file(spec.source):
        truth = truth.with_overrides(thaw_truth(spec.truth))
    selected = any(data.selections.values())
    estimators = ((AWARE, True),) if selected else ((PLAIN, False),)
    notes = []
    if selected and spec.compare_plain:
        estimators += ((PLAIN, False),)
    elif spec.compare_plain:
        notes.append("compare_plain has no effect: the design declares no selection, so the "
                     "plain likelihood is the only estimator")
    if run_config.model.form == "ratio" and truth.beta != 1.0:
        notes.append(f"the mocks have beta = {truth.beta:g} but the fit uses the ratio form "
                     f"(beta = 1): the estimator is misspecified on purpose or by mistake")
    return CampaignContext(spec=spec, run_config=run_config, data=data, truth=truth,
                           sim_config=sim_config, estimators=estimators, notes=tuple(notes))


def plan_tasks(spec):
    """Every job of a campaign, in the order of the final table."""
    tasks = [("grid", g, r) for g in range(len(spec.grid)) for r in range(spec.realisations)]
    if spec.sbc is not None:
        tasks += [("sbc", 0, i) for i in range(spec.sbc.n)]
    return tasks


def task_seed(seed, task):
    kind, g, r = task
    return child_seed(seed, SBC_INDEX, r) if kind == "sbc" else child_seed(seed, g, r)


def run_task(context, task):
    """Simulate and fit one mock; returns a journal record {"task": [...], "rows": [...]}."""
    spec = context.spec
    kind, g, r = task
    seq = task_seed(spec.seed, task)
    mock_seed, fit_seed, prior_seed = child_seeds(seq, 3)
    sbc = kind == "sbc"
    if sbc:
        k_true = float(np.random.default_rng(prior_seed).uniform(*spec.sbc.prior))
    else:
        k_true = float(spec.grid[g])
    base = {"kind": kind, "grid_index": -1 if sbc else g, "realisation": r, "k_true": k_true,
            "seed_entropy": str(seq.entropy), "spawn_key": "/".join(map(str, seq.spawn_key))}
    rows = []
    try:
        truth = replace(context.truth, k=k_true)
        if context.sim_config is None:
            catalog = draw_replica(context.run_config, context.data, truth, mock_seed)
        else:
            catalog = draw_simulated(context.sim_config, truth, mock_seed)
    except _FIT_FAILURES as exc:
        return {"task": list(task), "rows": [_failed_row(base, name, exc)
                                             for name, _ in context.estimators]}
    for name, aware in context.estimators:
        try:
            fit = fit_replica(context.run_config, context.data, catalog, mode=spec.mode,
                              selection_aware=aware, seed=fit_seed, max_steps=spec.max_steps,
                              n_draws=spec.sbc.draws if sbc else 0)
        except _FIT_FAILURES as exc:
            rows.append(_failed_row(base, name, exc, n_objects=len(catalog)))
            continue
        (lo68, hi68), (lo95, hi95) = fit["interval68"], fit["interval95"]
        rows.append({**base, "estimator": name, "k_estimate": fit["k"], "k_std": fit["k_std"],
                     "lo68": lo68, "hi68": hi68, "lo95": lo95, "hi95": hi95,
                     "covered68": bool(lo68 <= k_true <= hi68),
                     "covered95": bool(lo95 <= k_true <= hi95), "converged": fit["converged"],
                     "tau_max": fit["tau_max"], "n_steps": fit["n_steps"], "path": fit["path"],
                     "ess_fraction": fit["ess_fraction"],
                     "sbc_rank": calibration.sbc_rank(k_true, fit["k_draws"]) if sbc else -1,
                     "n_draws": spec.sbc.draws if sbc else 0, "n_objects": len(catalog),
                     "error": ""})
    return {"task": list(task), "rows": rows}


def _failed_row(base, estimator, exc, n_objects=0):
    nan = float("nan")
    return {**base, "estimator": estimator, "k_estimate": nan, "k_std": nan, "lo68": nan,
            "hi68": nan, "lo95": nan, "hi95": nan, "covered68": False, "covered95": False,
            "converged": False, "tau_max": nan, "n_steps": 0, "path": "failed", "ess_fraction": nan,
            "sbc_rank": -1, "n_draws": 0,
            "n_objects": n_objects, "error": f"{type(exc).__name__}: {exc}"}


def fingerprint(context):
    """A hash of everything that determines the rows: a journal from another campaign is refused."""
    spec = context.spec
    files = {key: sha256_file(path) for key, path in
             (("design", spec.design), ("simulation", spec.simulation), ("fit", spec.fit)) if path}
    described = {k: v for k, v in spec.to_dict().items() if k not in ("source", "design",
                                                                      "simulation", "fit")}
    payload = {"campaign": described, "files": files, "truth": context.truth.to_dict(exclude=("k",)),
               "data": [f["sha256"] for f in getattr(context.data, "files", [])],
               "estimators": context.estimators, "run": context.run_config.to_dict()["model"]}
    text = json.dumps(payload, sort_keys=True, default=str)
    return hashlib.sha256(text.encode()).hexdigest()


def stored_seed(out_dir):
    """The seed recorded by an earlier (interrupted) run in `out_dir`, or None."""
    path = Path(out_dir) / STAMP
    if not path.is_file():
        return None
    try:
        return json.loads(path.read_text()).get("seed")
    except (OSError, json.JSONDecodeError):
        return None


def run_campaign(context, out_dir, executor, *, on_progress=None):
    """Run (or resume) a campaign, journaling into `out_dir`; returns a CampaignResult.

    Parameters
    ----------
    context : CampaignContext (its spec's seed must be set)
    out_dir : path; holds campaign.json and journal.jsonl (kept for resuming)
    executor : an executor of `cosmogrow.campaigns.executors`
    on_progress : callable(done, total, elapsed_s, eta_s), optional; called after every job
        (eta_s is NaN until the rate is known)
    """
    spec = context.spec
    if spec.seed is None:
        raise ConfigError("campaign seed is not set")
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    stamp = {"fingerprint": fingerprint(context), "seed": spec.seed}
    stamp_path = out_dir / STAMP
    if stamp_path.is_file():
        old = json.loads(stamp_path.read_text())
        if old.get("fingerprint") != stamp["fingerprint"]:
            raise ConfigError(f"{stamp_path}: {out_dir} holds the journal of a different campaign "
                              f"(seed {old.get('seed')}); give --force to start this one afresh, or "
                              f"another --out")
    else:
        stamp_path.write_text(json.dumps(stamp, indent=2) + "\n")
    tasks = plan_tasks(spec)
    started = time.monotonic()
    first = None
    with Journal(out_dir / JOURNAL) as journal:
        done = {tuple(rec["task"]): rec for rec in journal.records}
        todo = [task for task in tasks if task not in done]
        resumed = len(tasks) - len(todo)
        for count, record in enumerate(executor.map_unordered(run_task, context, todo), start=1):
            journal.append(record)
            done[tuple(record["task"])] = record
            now = time.monotonic()
            first = now if first is None else first
            if on_progress is not None:
                # the rate since the first finished job: worker start-up does not skew it
                rate = (count - 1) / (now - first) if count > 1 and now > first else float("nan")
                on_progress(resumed + count, len(tasks), now - started, (len(todo) - count) / rate
                            if count < len(todo) else 0.0)
    rows = [row for task in tasks for row in done[task]["rows"]]
    results = results_table(rows, [name for name, _ in context.estimators])
    summary = summarise(context, results)
    summary["run"] = {"executor": getattr(executor, "description", "?"), "resumed_jobs": resumed,
                      "elapsed_s": time.monotonic() - started}
    return CampaignResult(results=results, summary=summary)


def results_table(rows, estimator_order):
    """One row per (mock, estimator), sorted by kind, grid index, realisation and estimator."""
    frame = pd.DataFrame(rows, columns=list(COLUMNS))
    order = {name: i for i, name in enumerate(estimator_order)}
    keys = (frame["kind"].map(_KIND_ORDER), frame["grid_index"], frame["realisation"],
            frame["estimator"].map(order))
    frame = frame.iloc[np.lexsort(tuple(reversed([k.to_numpy() for k in keys])))]
    frame = frame.reset_index(drop=True)
    for column in ("grid_index", "realisation", "n_steps", "sbc_rank", "n_draws", "n_objects"):
        frame[column] = frame[column].astype("int64")
    for column in ("covered68", "covered95", "converged"):
        frame[column] = frame[column].astype(bool)
    return frame


def summarise(context, results):
    """summary.json content: calibration per injected k and estimator, and the SBC block."""
    spec = context.spec
    recovery, sbc = {}, {}
    for name, _ in context.estimators:
        mine = results[results["estimator"] == name]
        blocks = []
        for g, k in enumerate(spec.grid):
            rows = mine[(mine["kind"] == "grid") & (mine["grid_index"] == g)]
            if len(rows):
                blocks.append(calibration.recovery_block(
                    k, rows["k_estimate"], rows["k_std"], rows["lo68"], rows["hi68"],
                    rows["lo95"], rows["hi95"], rows["converged"]))
        recovery[name] = blocks
        if spec.sbc is not None:
            rows = mine[(mine["kind"] == "sbc") & (mine["error"] == "")]
            sbc[name] = calibration.sbc_block(rows["sbc_rank"].to_numpy(), spec.sbc.draws,
                                              spec.sbc.prior)
    return {"campaign": spec.to_dict(), "mode": spec.mode,
            "estimators": [name for name, _ in context.estimators], "notes": list(context.notes),
            "truth": context.truth.to_dict(exclude=("k",)), "n_mocks": int(len(plan_tasks(spec))),
            "n_rows": int(len(results)),
            "n_errors": int((results["error"] != "").sum()),
            "recovery": recovery, "sbc": sbc or None,
            "design": {"n_objects": int(results["n_objects"].median()) if len(results) else 0,
                       "selections": {name: [m.to_dict() for m in models]
                                      for name, models in context.data.selections.items()}},
            "versions": package_versions()}
