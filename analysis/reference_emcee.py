"""Reference for the whole-command benchmark: what a user writes by hand, fitted with emcee.

The coupled-growth model of docs/method.md#model in its plainest form, on the same catalogue files
as `cosmogrow fit`: log M_BH ~ N(alpha + (log M* - 11) - k log10(1+z) + delta_method,
sigma^2 + e_m^2 + e_s^2) (ratio form, first-order host errors, offsets of each non-reference
method with an N(0, 0.3^2) prior), a log-probability vectorised over walkers, the stretch move with
32 walkers started in a small ball around a least-squares guess, run until the chain is 50
integrated autocorrelation times long (checked every 100 steps), then the median and 68 % interval
of k printed. Run: python analysis/reference_emcee.py CATALOG.csv [CATALOG.csv ...]
"""

import sys

import emcee
import numpy as np
import pandas as pd

frames = [pd.read_csv(path) for path in sys.argv[1:]]
table = pd.concat(frames, ignore_index=True)
z, m, e_m = (table[c].to_numpy(float) for c in ("z", "log_mbh", "log_mbh_err"))
s, e_s = table["log_mstar"].to_numpy(float), table["log_mstar_err"].to_numpy(float)
methods = table["method"].astype(str).to_numpy() if "method" in table else np.full(len(z), "one")
names = sorted(set(methods))
offset_of = np.array([names.index(x) for x in methods])  # method 0 is the zero point
x = np.log10(1 + z)
base_var = e_m**2 + e_s**2
n_off = len(names) - 1


def log_prob(theta):
    """theta: (walkers, 3 + n_off) array of k, alpha, sigma, offsets."""
    k, alpha, sigma = theta[:, 0:1], theta[:, 1:2], theta[:, 2:3]
    offsets = np.concatenate([np.zeros((len(theta), 1)), theta[:, 3:]], axis=1)
    mu = alpha + (s - 11.0) - k * x + offsets[:, offset_of]
    var = sigma**2 + base_var
    log_like = -0.5 * np.sum((m - mu) ** 2 / var + np.log(2 * np.pi * var), axis=1)
    log_prior = -0.5 * np.sum((theta[:, 3:] / 0.3) ** 2, axis=1)
    ok = (sigma[:, 0] > 0) & (sigma[:, 0] < 3) & (np.abs(k[:, 0]) < 10)
    return np.where(ok, log_like + log_prior, -np.inf)


guess = np.polyfit(x, m - (s - 11.0), 1)
start = np.concatenate([[-guess[0], guess[1], 0.3], np.zeros(n_off)])
walkers, ndim = 32, len(start)
rng = np.random.default_rng(1)
sampler = emcee.EnsembleSampler(walkers, ndim, log_prob, vectorize=True)
state = start + 1e-3 * rng.standard_normal((walkers, ndim))
while True:
    state = sampler.run_mcmc(state, 100, progress=False)
    tau = sampler.get_autocorr_time(tol=0)
    if sampler.iteration > 50 * np.max(tau):
        break
burn = int(2 * np.max(tau))
k_draws = sampler.get_chain(discard=burn, flat=True)[:, 0]
lo, med, hi = np.percentile(k_draws, [16, 50, 84])
print(f"k = {med:.3f} +{hi - med:.3f} -{med - lo:.3f} ({sampler.iteration} steps, tau_max {np.max(tau):.1f})")
