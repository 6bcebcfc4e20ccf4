"""Cost of one fast-estimator fit (MAP + Laplace) of a mock on the hard-cut design, in CPU time.

Design: calib_hardcut.py's (2 x 250 objects, the distant sample cut hard at observed
log M_BH >= 8.4, selection-aware likelihood with calibrated host errors). For R mocks at k = 0..3
the script times, in CPU seconds of this process with one BLAS thread (as campaign workers run):
drawing the mock, building the model (selection, design, the two parent-host rounds with their
MAPs), and the estimate (MAP + Laplace), and counts the model's log_prob calls. CPU time per fit is
robust when other jobs share the cores; "fits/s on 2 idle cores" is 2 / (median CPU seconds per
fit), the campaign's rate when both workers get a whole core (the campaign journal and the pool
add little: see bench_campaign.py). Target: >= 30 fits/s on 2 cores.
Run: .venv/bin/python analysis/bench_fast_fit.py [--mocks 40]
"""

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")  # as campaign workers run

import argparse  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from dataclasses import replace  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_campaign import write_design  # noqa: E402
from bench_table import emit, row  # noqa: E402
from cosmogrow.campaigns.config import read_campaign_config  # noqa: E402
from cosmogrow.campaigns.mocks import draw_replica  # noqa: E402
from cosmogrow.campaigns.runner import prepare_campaign  # noqa: E402
from cosmogrow.inference.fit import build_model  # noqa: E402
from cosmogrow.inference.k_estimate import estimate_k  # noqa: E402
from cosmogrow.model.likelihood import CoupledGrowthModel  # noqa: E402

CUT = 8.4


class _Counter:
    """Counts calls of CoupledGrowthModel.log_prob while active."""

    def __init__(self):
        self.calls = 0
        self._original = CoupledGrowthModel.log_prob

    def __enter__(self):
        original = self._original

        def counted(model, theta, *args, **kwargs):
            self.calls += 1
            return original(model, theta, *args, **kwargs)
        CoupledGrowthModel.log_prob = counted
        return self

    def __exit__(self, *exc):
        CoupledGrowthModel.log_prob = self._original


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--mocks", type=int, default=40)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        design = write_design(folder, True, CUT)
        path = folder / "campaign.toml"
        path.write_text(f'seed = 11\ndesign = "{design}"\n[grid]\nk = [0.0]\nrealisations = 1\n')
        context = prepare_campaign(read_campaign_config(path))
    config, data = context.run_config, context.data
    stages = np.zeros((args.mocks, 3))
    calls = []
    load = os.getloadavg()[0]
    for i in range(args.mocks + 1):  # the first fit warms caches and is not counted
        truth = replace(context.truth, k=float(i % 4))
        with _Counter() as counter:
            c0 = time.process_time()
            catalog = draw_replica(config, data, truth, i)
            c1 = time.process_time()
            model = build_model(config, data, catalog=catalog)
            c2 = time.process_time()
            estimate_k(model, mode="fast")
            c3 = time.process_time()
        if i:
            stages[i - 1] = c1 - c0, c2 - c1, c3 - c2
            calls.append(counter.calls)
    per_fit = np.median(stages.sum(axis=1))
    draw, build, estimate = np.median(stages, axis=0) * 1e3
    rate = 2.0 / per_fit
    print(f"{args.mocks} mocks of N = 500 (load average {load:.1f} -> {os.getloadavg()[0]:.1f}): median CPU "
          f"per fit {per_fit * 1e3:.1f} ms = draw {draw:.1f} + model (two parent-host rounds) {build:.1f} + "
          f"MAP and Laplace {estimate:.1f} ms; {np.median(calls):.0f} log_prob calls per fit; "
          f"{rate:.0f} fits/s on 2 idle cores", flush=True)
    emit([row(f"fast estimator (MAP + Laplace) on the hard-cut design (log M_BH ≥ {CUT}), N = 500: CPU per "
              f"fit, {args.mocks} mocks, one BLAS thread (`bench_fast_fit.py`; load {load:.1f})",
              "≥ 30 fits/s on 2 cores", f"{per_fit * 1e3:.1f} ms per fit ({np.median(calls):.0f} log_prob "
              f"calls) → **{rate:.0f} fits/s** on 2 idle cores", rate >= 30)])


if __name__ == "__main__":
    main()
