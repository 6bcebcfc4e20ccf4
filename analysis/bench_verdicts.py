"""Benchmark: what the verdicts cost a fit (significances, sensitivity rows, information shares).

Prints, for the demo data and for a synthetic design of N objects (three samples, two mass
methods, two selections), the CPU seconds of the whole `run_fit` and of its verdict block
(`inference.fit.assess`), and their ratio, both measured in the same run.
Run: .venv/bin/python analysis/bench_verdicts.py [--n 10000]
"""

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402

from cosmogrow.config import parse_run_config, read_run_config  # noqa: E402
from cosmogrow.inference import fit as fit_module  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests"))
from mocks import mock_catalog, write_csv  # noqa: E402


def synthetic_config(n, folder):
    """A run configuration over N synthetic objects written to `folder`."""
    cat = mock_catalog(np.random.default_rng(3), 1.0, offsets={"virial": 0.2},
                       samples=((0.03, n // 3, "dynamical"), (0.1, n // 3, "virial"),
                                (1.2, n - 2 * (n // 3), "virial")))
    for name in ("S0", "S1", "S2"):
        write_csv(cat.subset(cat.sample == name), folder / f"{name}.csv")
    raw = {"seed": 1, "model": {"zero_point_method": "dynamical"},
           "sample": [{"name": "S0", "path": "S0.csv"},
                      {"name": "S1", "path": "S1.csv",
                       "selection": {"kind": "mass_cut", "log_mbh_min": 7.0, "on": "observed"}},
                      {"name": "S2", "path": "S2.csv",
                       "selection": {"kind": "mass_cut", "log_mbh_min": 7.5, "on": "intrinsic",
                                     "width": 0.2}}]}
    return parse_run_config(raw, base_dir=folder)


def measure(config):
    """(CPU seconds of run_fit, CPU seconds of its verdict block)."""
    data = fit_module.load_data(config)
    spent = {}
    original = fit_module.assess

    def timed(*args, **kwargs):
        start = time.process_time()
        out = original(*args, **kwargs)
        spent["assess"] = time.process_time() - start
        return out

    fit_module.assess = timed
    try:
        start = time.process_time()
        fit_module.run_fit(config, data)
        total = time.process_time() - start
    finally:
        fit_module.assess = original
    return total, spent["assess"]


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=10000, help="objects of the synthetic design")
    args = parser.parse_args()
    print(f"{'case':<22} {'fit CPU s':>10} {'verdicts CPU s':>15} {'share':>7}")
    with tempfile.TemporaryDirectory() as tmp:
        cases = [("demo data", read_run_config(ROOT / "demo_data" / "run.toml")),
                 (f"synthetic N = {args.n}", synthetic_config(args.n, Path(tmp)))]
        for name, config in cases:
            total, verdicts = measure(config)
            print(f"{name:<22} {total:>10.2f} {verdicts:>15.2f} {verdicts / total:>7.1%}")


if __name__ == "__main__":
    main()
