"""Benchmark of the fit (issue 2): likelihood speed, time to a converged fit, memory at N = 10^6.

Every target is a ratio against a reference measured in the same run, or a figure on this machine:
- reference likelihood: a per-object Python loop (math module), one parameter vector at a time;
- reference sampler: emcee with vectorize=False calling that loop, timed over a few steps.
Run: .venv/bin/python analysis/bench_fit.py [--max-n 1000000]
"""

import argparse
import json
import math
import subprocess
import sys
import time

import numpy as np

from bench_table import emit, row
from cosmogrow.data.catalog import Catalog
from cosmogrow.config import ModelOptions
from cosmogrow.inference.laplace import laplace, start_walkers
from cosmogrow.model.likelihood import CoupledGrowthModel, build_design
from cosmogrow.inference.mcmc import run_ensemble


def make_catalog(n, seed=0, k=2.0):
    rng = np.random.default_rng(seed)
    z = np.where(rng.random(n) < 0.5, rng.uniform(0.005, 0.05, n), rng.uniform(0.5, 2.0, n))
    s = rng.normal(11.0, 0.3, n)
    m_err = rng.uniform(0.05, 0.3, n)
    s_err = rng.uniform(0.05, 0.2, n)
    m = 8.5 + (s - 11.0) + rng.normal(0, 0.3, n) - k * np.log10(1 + z) + rng.normal(0, m_err)
    return Catalog.from_columns(z=z, log_mbh=m, log_mbh_err=m_err, log_mstar=s + rng.normal(0, s_err),
                                log_mstar_err=s_err, sample=np.where(z < 0.1, "near", "far"),
                                method="dynamical", ids=np.arange(n).astype(str))


def model_for(catalog):
    # first-order host errors, so the reference loop below computes the very same likelihood
    options = ModelOptions(form="ratio", host_errors="first_order")
    return CoupledGrowthModel(build_design(catalog, options), options)


def loop_log_like(theta, cat_lists):
    """Reference: the same likelihood, one object at a time in pure Python."""
    k, alpha, sigma = theta
    total = 0.0
    for z, m, e_m, s, e_s in cat_lists:
        mu = alpha + (s - 11.0) - k * math.log10(1.0 + z)
        var = sigma * sigma + e_m * e_m + e_s * e_s
        total += -0.5 * ((m - mu) ** 2 / var + math.log(2 * math.pi * var))
    return total


def best_of(fn, repeat=5):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def converged_fit(catalog, seed=1):
    model = model_for(catalog)
    t0 = time.perf_counter()
    approx = laplace(model)
    start = start_walkers(model, approx, 32, np.random.default_rng(seed))
    chain = run_ensemble(model.log_prob, start, max_steps=20000, seed=seed)
    return time.perf_counter() - t0, chain


def likelihood_speed(n=10_000, walkers=32):
    catalog = make_catalog(n)
    model = model_for(catalog)
    theta = np.tile(model.initial_guess(), (walkers, 1))
    cat_lists = list(zip(catalog.z, catalog.log_mbh, catalog.log_mbh_err, catalog.log_mstar, catalog.log_mstar_err))
    t_loop = best_of(lambda: loop_log_like(theta[0], cat_lists), 3)
    t_vec = best_of(lambda: model.log_prob(theta), 20) / walkers
    assert abs(loop_log_like(theta[0], cat_lists) - model.log_likelihood(theta[:1])[0]) < 1e-6
    return t_loop, t_vec


def reference_sampler_step(n=10_000, walkers=32, steps=3):
    import emcee

    catalog = make_catalog(n)
    model = model_for(catalog)
    cat_lists = list(zip(catalog.z, catalog.log_mbh, catalog.log_mbh_err, catalog.log_mstar, catalog.log_mstar_err))
    start = model.initial_guess() + 1e-3 * np.random.default_rng(0).standard_normal((walkers, 3))
    sampler = emcee.EnsembleSampler(walkers, 3, loop_log_like, args=(cat_lists,))
    t0 = time.perf_counter()
    sampler.run_mcmc(start, steps)
    return (time.perf_counter() - t0) / steps


def peak_memory_fit(n):
    """Converged fit of n objects in a fresh process; returns (seconds, peak RSS in GB, converged)."""
    code = ("import sys, json, resource; sys.path.insert(0, 'analysis'); import bench_fit as b; "
            f"cat = b.make_catalog({n}); t, c = b.converged_fit(cat); "
            "print(json.dumps([t, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1e6, c.converged]))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--max-n", type=int, default=1_000_000)
    args = parser.parse_args()
    t_loop, t_vec = likelihood_speed()
    rows = [row("plain likelihood, N = 10⁴, vs a per-object Python loop", "≥ 50×",
                f"{t_loop * 1e3:.1f} ms vs {t_vec * 1e6:.0f} µs per parameter vector: **{t_loop / t_vec:.0f}×**",
                t_loop / t_vec >= 50)]
    t_ref_step = reference_sampler_step()
    fit_time, chain = converged_fit(make_catalog(10_000))
    per_step = fit_time / chain.n_steps
    rows.append(row("sampler step, N = 10⁴, 32 walkers, vs non-vectorised emcee over that loop", "—",
                    f"{t_ref_step:.3f} s vs {per_step * 1e3:.2f} ms: **{t_ref_step / per_step:.0f}×**", None))
    rows.append(row("converged fit in Python (MAP + Laplace + emcee to 50 τ), N = 10⁴", "≤ 3 s",
                    f"{fit_time:.2f} s ({chain.n_steps} steps, τ = {chain.tau_max:.1f})", fit_time <= 3))
    n = 1000
    while n <= args.max_n:
        seconds, peak_gb, converged = peak_memory_fit(n)
        print(f"  N = {n:>8d}: {seconds:7.2f} s, peak RSS {peak_gb:5.2f} GB, converged {converged}")
        rows.append(row(f"converged fit in Python, N = {n}, fresh process", "—",
                        f"{seconds:.2f} s, peak RSS {peak_gb:.2f} GB", None))
        n *= 10
    emit(rows)


if __name__ == "__main__":
    main()
