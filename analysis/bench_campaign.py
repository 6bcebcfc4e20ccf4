"""Benchmark of injection-recovery campaigns (issue 4) at N = 500 objects per mock.

Measured in one run, through the campaign machinery itself (resample-hosts mocks, fits, journal
with fsync per mock). Rates are steady-state (first to last finished mock); the end-to-end rate
also pays the pool's start-up (spawning workers that import numpy, scipy and astropy):
- fast mode (MAP + Laplace) mock fits per second, one worker and all workers;
- full MCMC (emcee until 50 autocorrelation times, the campaign's step cap) fits per second;
- the speed-up of two workers over one on the same jobs.
Targets (issue 4): fast >= 50 /s, MCMC >= 2 /s, two workers >= 1.7x one worker.

Two designs: "plain" (a local and a z ~ 1 sample of 250 objects each, no selection) and "mass_cut"
(the same, the z ~ 1 sample cut at observed log M_BH >= 8.3, fitted with the selection-aware
likelihood). The machine's load average is printed: other processes share the cores.
Run: .venv/bin/python analysis/bench_campaign.py [--fast-mocks 1000] [--mcmc-mocks 24]
"""

import argparse
import json
import os
import resource
import tempfile
import time
from pathlib import Path

from bench_table import emit, row
from cosmogrow.campaigns.runner import prepare_campaign, run_campaign
from cosmogrow.campaigns.config import read_campaign_config
from cosmogrow.campaigns.executors import ProcessExecutor, available_cores
from cosmogrow.simulation.population import simulate_population

N_PER_SAMPLE = 250
CUT = 8.3


def write_design(folder, cut, level=CUT):
    """A design of 2 x 250 objects drawn by the simulator, written as catalogues + run.toml
    (with `cut`, the high-z sample is cut at observed log M_BH >= `level`)."""
    high = {"name": "high", "n": N_PER_SAMPLE, "z_range": [0.8, 1.2], "method": "dynamical",
            "log_mstar_min": 10.5, "log_mstar_max": 12.0}
    if cut:
        high["selection"] = {"kind": "mass_cut", "log_mbh_min": level, "on": "observed"}
    config = {"seed": 1, "truth": {"k": 1.0, "alpha": 8.5, "sigma_int": 0.3},
              "sample": [{"name": "local", "n": N_PER_SAMPLE, "z_range": [0.01, 0.05],
                          "method": "dynamical", "log_mstar_min": 10.5, "log_mstar_max": 12.0},
                         high]}
    catalog = simulate_population(config).catalog
    lines = []
    for name in catalog.sample_names:
        catalog.subset(catalog.sample == name).to_dataframe().to_csv(folder / f"{name}.csv", index=False)
        lines.append(f'[[sample]]\nname = "{name}"\npath = "{name}.csv"')
        if cut and name == "high":
            lines.append(f'selection = {{ kind = "mass_cut", log_mbh_min = {level}, on = "observed" }}')
    (folder / "run.toml").write_text("\n".join(lines) + "\n")
    return folder / "run.toml"


def timed_campaign(folder, design, mode, n_mocks, executor, tag):
    """Throughput of a campaign of n_mocks mocks (one grid point).

    Returns a dict: steady mocks/s between the first and the last finished mock, end-to-end
    mocks/s including the executor's start-up, the cores the workers actually obtained (their CPU
    time over the wall time: below the worker count when other processes share the machine), and
    the fraction of converged fits.
    """
    path = folder / f"{tag}.toml"
    path.write_text(f'seed = 3\ndesign = "{design}"\n[grid]\nk = [1.0]\n'
                    f'realisations = {n_mocks}\n[estimator]\nmode = "{mode}"\n')
    context = prepare_campaign(read_campaign_config(path))
    stamps = []
    cpu_before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    result = run_campaign(context, folder / tag, executor,
                          on_progress=lambda *args: stamps.append(time.perf_counter()))
    elapsed = time.perf_counter() - start
    cpu_after = resource.getrusage(resource.RUSAGE_CHILDREN)  # workers are reaped by now
    cpu = (cpu_after.ru_utime - cpu_before.ru_utime) + (cpu_after.ru_stime - cpu_before.ru_stime)
    return {"steady": (len(stamps) - 1) / (stamps[-1] - stamps[0]), "end_to_end": n_mocks / elapsed,
            "cores_obtained": cpu / elapsed, "converged": float(result.results["converged"].mean())}


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--fast-mocks", type=int, default=1000)
    parser.add_argument("--mcmc-mocks", type=int, default=24)
    args = parser.parse_args()
    cores = available_cores()
    print(f"cores available: {cores}; load average before: {os.getloadavg()[0]:.2f}")
    report = {}
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        for name, cut in (("plain", False), ("mass_cut", True)):
            folder = tmp / name
            folder.mkdir()
            design = write_design(folder, cut)
            rates = {}
            for workers in (1, 2) if cores >= 2 else (1,):
                for mode, n in (("fast", args.fast_mocks), ("mcmc", args.mcmc_mocks)):
                    pool = ProcessExecutor(workers)  # spawned workers, one BLAS thread each
                    got = timed_campaign(folder, design, mode, n, pool, f"{mode}{workers}")
                    rates[f"{mode}_per_s_{workers}w"] = got["steady"]
                    rates[f"{mode}_per_s_{workers}w_end_to_end"] = got["end_to_end"]
                    rates[f"{mode}_cores_obtained_{workers}w"] = got["cores_obtained"]
                    rates[f"{mode}_converged_{workers}w"] = got["converged"]
            if cores >= 2:
                rates["fast_speedup_2_vs_1"] = rates["fast_per_s_2w"] / rates["fast_per_s_1w"]
                rates["mcmc_speedup_2_vs_1"] = rates["mcmc_per_s_2w"] / rates["mcmc_per_s_1w"]
            report[name] = rates
            print(f"\n[{name} design, N = {2 * N_PER_SAMPLE} objects per mock]")
            for key, value in rates.items():
                print(f"  {key:34s} {value:8.2f}")
    print(f"\nload average after: {os.getloadavg()[0]:.2f}")
    targets = {"fast >= 50 /s": ("fast_per_s_2w", 50.0), "MCMC >= 2 /s": ("mcmc_per_s_2w", 2.0),
               "fast 2 workers >= 1.7x": ("fast_speedup_2_vs_1", 1.7),
               "MCMC 2 workers >= 1.7x": ("mcmc_speedup_2_vs_1", 1.7)}
    rows = []
    for name, values in report.items():
        for label, (key, target) in targets.items():
            if key in values:
                rows.append(row(f"campaign, {name} design, N = {2 * N_PER_SAMPLE} per mock: {label.split(' >=')[0]}",
                                f"≥ {target:g}", f"{values[key]:.2f}", values[key] >= target))
    print(json.dumps(report))
    emit(rows)


if __name__ == "__main__":
    main()
