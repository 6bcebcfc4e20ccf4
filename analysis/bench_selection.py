"""Benchmark of issue 3: the selection-aware likelihood against the plain one, and the simulator.

Targets: selection-aware likelihood <= 2x the plain one (one cut per sample; <= 5x with two cuts on
one sample); simulating 10^6 hosts with selection <= 2 s.
The likelihood is the fit's own (cosmogrow.model), evaluated for 32 walkers at once, with one BLAS
thread as `cosmogrow` runs it. The plain and the selection-aware likelihood are called alternately
(interleaved) and each is timed per call in CPU time of this process (the figure: robust when other
jobs share the cores) and in wall time; the minimum over the calls is kept.
The selection-aware likelihood is timed with the compiled loops (selection/_kernels.c) and, for
comparison, with numpy alone (as installed without a C compiler).
Run: .venv/bin/python analysis/bench_selection.py
With glibc's default allocator settings, each (walkers, N) temporary may be handed back to the system
and page-faulted in again, so the plain reference alone jumps between 0.2 and 0.9 ms from one row to
the next; `make bench` therefore runs this script with MALLOC_MMAP_THRESHOLD_=33554432 and
MALLOC_TRIM_THRESHOLD_=1073741824 (no page faults: the arithmetic alone, stable to a few per cent).
"""

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")  # as the command-line tool runs

import time  # noqa: E402

import numpy as np  # noqa: E402
from astropy.cosmology import Planck18  # noqa: E402

from bench_table import emit, row  # noqa: E402
from cosmogrow.data.catalog import Catalog  # noqa: E402
from cosmogrow.config import ModelOptions  # noqa: E402
from cosmogrow.model.likelihood import CoupledGrowthModel, build_design  # noqa: E402
from cosmogrow.selection import kernels  # noqa: E402
from cosmogrow.selection.compiled import SelectionSet  # noqa: E402
from cosmogrow.simulation.population import simulate_population  # noqa: E402

#: Target ratio to the plain likelihood: 2x with one cut per sample, 5x with two cuts on one sample.
TARGETS = {"flux x observed cut (far), two cuts": 5.0}
SELECTIONS = {
    "observed mass cut (far)": {"far": {"kind": "mass_cut", "log_mbh_min": 8.0}},
    "flux limit (far)": {"far": {"kind": "flux_limit", "flux_limit": 1e-13}},
    "SOI (near) + flux (far)": {"near": {"kind": "sphere_of_influence"},
                                "far": {"kind": "flux_limit", "flux_limit": 1e-13}},
    "flux x observed cut (far), two cuts": {"far": [
        {"kind": "flux_limit", "flux_limit": 1e-13},
        {"kind": "mass_cut", "log_mbh_min": 8.0, "width": 0.1}]},
}


def make_catalog(n, seed=0):
    rng = np.random.default_rng(seed)
    z = np.where(rng.random(n) < 0.5, rng.uniform(0.005, 0.05, n), rng.uniform(0.5, 2.0, n))
    s = rng.normal(11.0, 0.3, n)
    m_err = rng.uniform(0.05, 0.3, n)
    m = 8.5 + (s - 11.0) + rng.normal(0, 0.3, n) + rng.normal(0, m_err)
    return Catalog.from_columns(z=z, log_mbh=m, log_mbh_err=m_err, log_mstar=s,
                                log_mstar_err=np.full(n, 0.1), sample=np.where(z < 0.1, "near", "far"),
                                method="dynamical")


def _timed(function):
    """(CPU seconds, wall seconds) of one call."""
    c0, t0 = time.process_time(), time.perf_counter()
    function()
    return time.process_time() - c0, time.perf_counter() - t0


def likelihood_ratios(n=1000, walkers=32, repeat=300):
    """min over `repeat` interleaved calls of the per-object plain likelihood, the selection-aware
    one and the correction alone (interleaving keeps both under the same machine load)."""
    catalog = make_catalog(n)
    options = ModelOptions(form="ratio")
    design = build_design(catalog, options)
    plain = CoupledGrowthModel(design, options)
    theta = np.tile(plain.initial_guess(), (walkers, 1))
    theta = theta + 1e-3 * np.random.default_rng(1).standard_normal(theta.shape)
    mu = np.full((walkers, n), 8.5)
    var = np.full((walkers, n), 0.1)
    print(f"likelihood, N = {n}, {walkers} walkers, load average {os.getloadavg()[0]:.1f}; 'plain' is "
          "the plain likelihood object by object (the reference of the target), 'moments' the plain "
          "fit's own shortcut; ratios of per-call CPU time (wall time in brackets):")
    rows = []
    compiled_loops = kernels.AVAILABLE
    for name, selections in SELECTIONS.items():
        selection = SelectionSet.compile(selections, catalog, Planck18)
        model = CoupledGrowthModel(design, options, selection=selection)
        kernels.AVAILABLE = False  # the same model on numpy alone (as without a C compiler)
        numpy_model = CoupledGrowthModel(design, options, selection=selection)
        kernels.AVAILABLE = compiled_loops
        calls = (lambda: plain._log_likelihood_chunk(theta), lambda: plain.log_likelihood(theta),
                 lambda: model.log_likelihood(theta),
                 lambda: selection.log_correction(mu, 0.0, var, catalog.log_mbh, catalog.log_mbh_err),
                 lambda: _without_kernels(numpy_model.log_likelihood, theta))
        times = np.array([[_timed(call) for call in calls] for _ in range(repeat)])  # (repeat, 5, 2)
        (c_plain, c_moments, c_sel, c_corr, c_numpy), (w_plain, _, w_sel, _, _) = times.min(axis=0).T * 1e3
        ratio = c_sel / c_plain
        print(f"  {name:38s}: plain {c_plain:.3f} ms, moments {c_moments:.3f} ms, selection-aware "
              f"{c_sel:.3f} ms = {ratio:.2f}x plain ({w_sel / w_plain:.2f}x in wall time), "
              f"{c_sel / c_moments:.1f}x moments; log_correction alone {c_corr:.3f} ms; numpy alone "
              f"{c_numpy:.3f} ms = {c_numpy / c_plain:.2f}x plain")
        target = TARGETS.get(name, 2.0)
        loops = "compiled loops" if compiled_loops else "numpy: the compiled loops are not built"
        rows.append(row(f"selection-aware likelihood vs plain, {name}, N = {n}, {walkers} walkers "
                        f"(CPU time per call, interleaved, {loops}; load {os.getloadavg()[0]:.1f})",
                        f"≤ {target:g}×", f"**{ratio:.2f}×** (wall {w_sel / w_plain:.2f}×; "
                        f"{c_sel / c_moments:.1f}× the moments shortcut; numpy alone "
                        f"{c_numpy / c_plain:.2f}×)", ratio <= target))
    return rows


def _without_kernels(function, *args):
    """Call with the compiled loops switched off (the two-cut orthant looks them up per call)."""
    available, kernels.AVAILABLE = kernels.AVAILABLE, False
    try:
        return function(*args)
    finally:
        kernels.AVAILABLE = available


def simulator_speed():
    rows = []
    selection = [{"kind": "flux_limit", "flux_limit": 1e-13},
                 {"kind": "host_mass_cut", "log_mstar_min": 10.5}]
    base = {"name": "far", "z_range": [0.5, 2.0], "method": "virial", "selection": selection}
    simulate_population({"seed": 1, "sample": [{**base, "n": 1000}]})  # warm up (astropy realisation)
    for n in (420_000, 1_000_000):
        t0, c0 = time.perf_counter(), time.process_time()
        _, truth = simulate_population({"seed": 1, "sample": [{**base, "n": n}]})
        seconds, cpu = time.perf_counter() - t0, time.process_time() - c0
        info = truth["samples"][0]
        print(f"simulate: {info['n_candidates']:.3g} hosts drawn, {n} selected "
              f"(acceptance {info['acceptance']:.3f}): {seconds:.2f} s wall, {cpu:.2f} s CPU "
              "(target <= 2 s for 1e6 hosts)")
        hosts = info["n_candidates"]
        rows.append(row(f"simulate {hosts:.2g} hosts with selection ({n:.2g} selected)",
                        "≤ 2 s per 10⁶ hosts", f"{seconds:.2f} s", seconds <= 2.0 * hosts / 1e6))
    return rows


if __name__ == "__main__":
    emit(likelihood_ratios() + simulator_speed())
