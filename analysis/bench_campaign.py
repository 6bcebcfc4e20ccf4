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
import tempfile
import time
from pathlib import Path

from cosmogrow.campaign import prepare_campaign, run_campaign
from cosmogrow.campaign_config import read_campaign_config
from cosmogrow.executors import ProcessExecutor, SerialExecutor, available_cores
from cosmogrow.simulate import simulate_population

N_PER_SAMPLE = 250
CUT = 8.3


def write_design(folder, cut):
    """A design of 2 x 250 objects drawn by the simulator, written as catalogues + run.toml."""
    high = {"name": "high", "n": N_PER_SAMPLE, "z_range": [0.8, 1.2], "method": "dynamical",
            "log_mstar_min": 10.5, "log_mstar_max": 12.0}
    if cut:
        high["selection"] = {"kind": "mass_cut", "log_mbh_min": CUT, "on": "observed"}
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
            lines.append(f'selection = {{ kind = "mass_cut", log_mbh_min = {CUT}, on = "observed" }}')
    (folder / "run.toml").write_text("\n".join(lines) + "\n")
    return folder / "run.toml"


def timed_campaign(folder, design, mode, n_mocks, executor, tag):
    """Throughput of a campaign of n_mocks mocks (one grid point).

    Returns (steady mocks/s between the first and the last finished mock, end-to-end mocks/s
    including the executor's start-up, fraction of converged fits).
    """
    path = folder / f"{tag}.toml"
    path.write_text(f'seed = 3\ndesign = "{design}"\n[grid]\nk = [1.0]\n'
                    f'realisations = {n_mocks}\n[estimator]\nmode = "{mode}"\n')
    context = prepare_campaign(read_campaign_config(path))
    stamps = []
    start = time.perf_counter()
    result = run_campaign(context, folder / tag, executor,
                          on_progress=lambda *args: stamps.append(time.perf_counter()))
    elapsed = time.perf_counter() - start
    steady = (len(stamps) - 1) / (stamps[-1] - stamps[0])
    return steady, n_mocks / elapsed, float(result.results["converged"].mean())


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
            serial = SerialExecutor()
            fast_1, _, _ = timed_campaign(folder, design, "fast", args.fast_mocks, serial, "fast1")
            mcmc_1, _, conv = timed_campaign(folder, design, "mcmc", args.mcmc_mocks, serial, "mcmc1")
            row = {"fast_per_s_1_worker": fast_1, "mcmc_per_s_1_worker": mcmc_1}
            if cores >= 2:
                pool = ProcessExecutor(2)
                fast_2, fast_2_e2e, _ = timed_campaign(folder, design, "fast", args.fast_mocks,
                                                       pool, "fast2")
                mcmc_2, mcmc_2_e2e, conv = timed_campaign(folder, design, "mcmc", args.mcmc_mocks,
                                                          pool, "mcmc2")
                row.update(fast_per_s_2_workers=fast_2, fast_per_s_2_workers_end_to_end=fast_2_e2e,
                           speedup_2_vs_1=fast_2 / fast_1, mcmc_per_s_2_workers=mcmc_2,
                           mcmc_per_s_2_workers_end_to_end=mcmc_2_e2e,
                           mcmc_speedup_2_vs_1=mcmc_2 / mcmc_1)
            row["mcmc_converged_fraction"] = conv
            report[name] = row
            print(f"\n[{name} design, N = {2 * N_PER_SAMPLE} objects per mock]")
            for key, value in row.items():
                print(f"  {key:28s} {value:8.2f}")
    print(f"\nload average after: {os.getloadavg()[0]:.2f}")
    targets = {"fast >= 50 /s": ("fast_per_s_2_workers", 50.0), "MCMC >= 2 /s": ("mcmc_per_s_2_workers", 2.0),
               "2 workers >= 1.7x": ("speedup_2_vs_1", 1.7),
               "MCMC 2 workers >= 1.7x": ("mcmc_speedup_2_vs_1", 1.7)}
    for name, row in report.items():
        for label, (key, target) in targets.items():
            if key in row:
                print(f"  {name:9s} {label:18s} measured {row[key]:7.2f}  "
                      f"{'met' if row[key] >= target else 'NOT met'}")
    print(json.dumps(report))


if __name__ == "__main__":
    main()
