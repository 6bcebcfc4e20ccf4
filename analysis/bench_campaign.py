"""Benchmark of injection-recovery campaigns (issue 4) at N = 500 objects per mock.

Measured in one run, through the campaign machinery itself (resample-hosts mocks, fits, journal
with fsync per mock):
- fast mode (MAP + Laplace) mock fits per second, one worker and all workers;
- full MCMC (emcee until 50 autocorrelation times, the campaign's step cap) fits per second;
- the speed-up of two workers over one on the same jobs.
Targets (issue 4): fast >= 50 /s, MCMC >= 2 /s, two workers >= 1.7x one worker.

Two designs: "plain" (a local and a z ~ 1 sample of 250 objects each, no selection) and "mass_cut"
(the same, the z ~ 1 sample cut at observed log M_BH >= 8.3, fitted with the selection-aware
likelihood). The machine's load average is printed: other processes share the cores.
Run: .venv/bin/python analysis/bench_campaign.py [--fast-mocks 400] [--mcmc-mocks 24]
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
    """Wall time of a campaign of n_mocks mocks (one grid point), executor start-up excluded."""
    path = folder / f"{tag}.toml"
    path.write_text(f'seed = 3\ndesign = "{design}"\n[grid]\nk = [1.0]\n'
                    f'realisations = {n_mocks}\n[estimator]\nmode = "{mode}"\n')
    context = prepare_campaign(read_campaign_config(path))
    # warm the workers (imports, first call) on a throw-away campaign of a few mocks
    warm = folder / f"{tag}_warm.toml"
    warm.write_text(path.read_text().replace(f"realisations = {n_mocks}", "realisations = 4"))
    run_campaign(prepare_campaign(read_campaign_config(warm)), folder / f"{tag}_warm", executor)
    start = time.perf_counter()
    result = run_campaign(context, folder / tag, executor)
    elapsed = time.perf_counter() - start
    converged = float(result.results["converged"].mean())
    return n_mocks / elapsed, converged


class _Persistent(ProcessExecutor):
    """A process pool kept alive across campaigns, so start-up is not timed."""

    def map_unordered(self, function, context, tasks):
        from concurrent.futures import ProcessPoolExecutor

        from cosmogrow import executors

        if self._pool is None or getattr(self, "_context", None) is not context:
            if self._pool is not None:
                self._pool.shutdown()
            self._pool = ProcessPoolExecutor(max_workers=self.workers,
                                             initializer=executors._install_context,
                                             initargs=(context,))
            self._context = context
        futures = [self._pool.submit(executors._call_with_worker_context, function, t) for t in tasks]
        from concurrent.futures import as_completed

        for future in as_completed(futures):
            yield future.result()


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--fast-mocks", type=int, default=400)
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
            fast_1, _ = timed_campaign(folder, design, "fast", args.fast_mocks, serial, "fast1")
            row = {"fast_per_s_1_worker": fast_1}
            if cores >= 2:
                pool = _Persistent(2)
                fast_2, _ = timed_campaign(folder, design, "fast", args.fast_mocks, pool, "fast2")
                mcmc_2, conv = timed_campaign(folder, design, "mcmc", args.mcmc_mocks, pool, "mcmc2")
                pool.close()
                row.update(fast_per_s_2_workers=fast_2, speedup_2_vs_1=fast_2 / fast_1,
                           mcmc_per_s_2_workers=mcmc_2, mcmc_converged_fraction=conv)
            else:
                mcmc_1, conv = timed_campaign(folder, design, "mcmc", args.mcmc_mocks, serial, "mcmc1")
                row.update(mcmc_per_s_1_worker=mcmc_1, mcmc_converged_fraction=conv)
            report[name] = row
            print(f"\n[{name} design, N = {2 * N_PER_SAMPLE} objects per mock]")
            for key, value in row.items():
                print(f"  {key:28s} {value:8.2f}")
    print(f"\nload average after: {os.getloadavg()[0]:.2f}")
    targets = {"fast >= 50 /s": ("fast_per_s_2_workers", 50.0), "MCMC >= 2 /s": ("mcmc_per_s_2_workers", 2.0),
               "2 workers >= 1.7x": ("speedup_2_vs_1", 1.7)}
    for name, row in report.items():
        for label, (key, target) in targets.items():
            if key in row:
                print(f"  {name:9s} {label:18s} measured {row[key]:7.2f}  "
                      f"{'met' if row[key] >= target else 'NOT met'}")
    print(json.dumps(report))


if __name__ == "__main__":
    main()
