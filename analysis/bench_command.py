"""Whole-command benchmark of `cosmogrow fit`: what the user waits for, reading and writing included.

Every figure is a whole process, timed from outside (wall clock, median of `--repeats` runs; peak
RSS from the kernel's accounting of the child):
- `cosmogrow fit` on N objects (40 % local dynamical masses at z < 0.05, 60 % reverberation masses at
  0.5 < z < 2, true k = 1) against analysis/reference_emcee.py, a hand-written vectorised emcee fit
  of the same files, measured in the same run (target: <= 0.5x its wall time at N = 1e4);
- absolute targets at N = 1e4, 1e5, 1e6 (<= 5 s, <= 30 s, <= 5 min and <= 1.5 GB);
- the cross-check's share of the fit's own stages (summary.json `timings`; target <= 10 %): the
  seconds it adds, i.e. from 5e4 objects the wait for the second process that ran it beside the
  sampling, whose own seconds are printed too;
- `cosmogrow --help` and `cosmogrow fit --help` (target <= 0.5 s).
Run: .venv/bin/python analysis/bench_command.py [--sizes 10000 100000 1000000] [--repeats 3]
The machine's load average is printed: on a shared machine only same-run ratios are comparable.
"""

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_table import emit, row  # noqa: E402

HERE = Path(__file__).resolve().parent
ENTRY = [sys.executable, "-m", "cosmogrow.cli"]  # what the `cosmogrow` script runs (cli.console)
LIMITS = {10_000: 5.0, 100_000: 30.0, 1_000_000: 300.0}
SUPERSCRIPT = str.maketrans("0123456789", "⁰¹²³⁴⁵⁶⁷⁸⁹")


def power(n):
    """10⁴ for 10000 (sizes are powers of ten here; others are printed as they are)."""
    exponent = int(round(np.log10(n)))
    return f"10{str(exponent).translate(SUPERSCRIPT)}" if 10**exponent == n else str(n)


def write_catalogues(folder, n, seed=0, k=1.0):
    """Two CSV files of n objects in all (the design of the issue's measurement)."""
    rng = np.random.default_rng(seed)
    paths = []
    for name, share, z_range, method, error in (("local", 0.4, (0.005, 0.05), "dynamical", 0.1),
                                                 ("distant", 0.6, (0.5, 2.0), "reverberation", 0.2)):
        m = int(round(n * share))
        z = rng.uniform(*z_range, m)
        s = rng.normal(11.0, 0.3, m)
        log_mbh = 8.5 + (s - 11.0) + rng.normal(0, 0.3, m) - k * np.log10(1 + z) + rng.normal(0, error, m)
        path = folder / f"{name}_{n}.csv"
        pd.DataFrame({"id": [f"{name}{i}" for i in range(m)], "z": z, "log_mbh": log_mbh,
                      "log_mbh_err": error, "log_mstar": s + rng.normal(0, 0.15, m),
                      "log_mstar_err": 0.15, "method": method}).to_csv(path, index=False)
        paths.append(str(path))
    return paths


def run_process(command):
    """(wall seconds, peak RSS in GB) of one child process; raises if it fails."""
    start = time.perf_counter()
    child = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    _, status, usage = os.wait4(child.pid, 0)
    seconds = time.perf_counter() - start
    child.returncode = os.waitstatus_to_exitcode(status)
    error = child.stderr.read().decode()
    child.stderr.close()
    if child.returncode not in (0, 3):
        raise RuntimeError(f"{command[:4]} failed ({child.returncode}): {error[-2000:]}")
    return seconds, usage.ru_maxrss / 1e6


def fit_runs(paths, out, repeats):
    """Wall times, peak RSS and the last run's stage timings of `cosmogrow fit`."""
    walls, peaks = [], []
    for _ in range(repeats):
        seconds, peak = run_process(ENTRY + ["fit", *paths, "--out", str(out), "--seed", "1", "--quiet", "--force"])
        walls.append(seconds)
        peaks.append(peak)
    timings = json.loads((out / "summary.json").read_text())["timings"]
    return statistics.median(walls), max(peaks), timings


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[10_000, 100_000, 1_000_000])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--repeats-large", type=int, default=1, help="runs at N >= 1e6 (default 1)")
    args = parser.parse_args()
    print(f"load average before: {os.getloadavg()[0]:.2f}", flush=True)
    rows = []
    helps = {label: statistics.median(run_process(ENTRY + argv)[0] for _ in range(5))
             for label, argv in (("cosmogrow --help", ["--help"]), ("cosmogrow fit --help", ["fit", "--help"]))}
    for label, seconds in helps.items():
        rows.append(row(f"`{label}`, whole process (median of 5)", "≤ 0.5 s", f"{seconds:.2f} s", seconds <= 0.5))
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        for n in args.sizes:
            paths = write_catalogues(tmp, n)
            repeats = args.repeats if n < 1_000_000 else args.repeats_large
            wall, peak, timings = fit_runs(paths, tmp / f"out{n}", repeats)
            stages = ", ".join(f"{name} {sec:.1f}" for name, sec in timings.items()
                               if name not in ("total", "beside"))
            beside = ", ".join(f"{name} {sec:.1f}" for name, sec in timings.get("beside", {}).items())
            print(f"N = {n}: fit {wall:.2f} s, peak {peak:.2f} GB; stages (s): {stages}"
                  + (f"; beside, in a second process (s): {beside}" if beside else ""), flush=True)
            if n == 10_000:
                ref = statistics.median(run_process([sys.executable, str(HERE / "reference_emcee.py"), *paths])[0]
                                        for _ in range(repeats))
                rows.append(row("`cosmogrow fit` vs hand-written emcee script (`reference_emcee.py`), "
                                "N = 10⁴, whole processes", "≤ 0.5×",
                                f"{wall:.1f} s vs {ref:.1f} s: **{wall / ref:.2f}×**", wall / ref <= 0.5))
            limit = LIMITS.get(n)
            rows.append(row(f"`cosmogrow fit`, N = {power(n)}, reading and outputs included (median of {repeats})",
                            f"≤ {limit:g} s" if limit else "—", f"{wall:.1f} s",
                            wall <= limit if limit else None))
            if n >= 1_000_000:
                rows.append(row("peak memory of `cosmogrow fit`, N = 10⁶", "≤ 1.5 GB", f"{peak:.2f} GB",
                                peak <= 1.5))
            # what the cross-check adds to the fit's time: its stage (from 5e4 objects only the wait
            # for the second process that ran it beside the sampling); its own seconds beside
            waited, own = timings.get("crosscheck", 0.0), timings.get("beside", {}).get("crosscheck")
            share = waited / timings["total"]
            note = "" if own is None else f"; run beside the sampling: {own:.2f} s of its own"
            rows.append(row(f"cross-check share of the fit's stages, N = {power(n)}", "≤ 10 %",
                            f"{100 * share:.1f} % ({waited:.2f} s{note})", share <= 0.10))
    print(f"load average after: {os.getloadavg()[0]:.2f}")
    emit(rows)


if __name__ == "__main__":
    main()
