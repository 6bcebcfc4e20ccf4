"""Fit one model and reduce the result to k (docs/method.md#estimators).

The one "fit, then reduce to k" of the package, used for mocks (campaigns), null tests and the
challenge: the fast estimator (MAP + Laplace Gaussian) or the emcee ensemble started from the
Laplace approximation, as `cosmogrow fit` runs it. `sample_posterior` is the MCMC step alone, shared
with the full fit (`inference.fit.run_fit`).
"""

from dataclasses import dataclass

import numpy as np
from scipy import stats

from ..config import SamplerOptions
from ..errors import ConfigError
from ..seeding import child_seeds, make_rng
from .forked import HALVES_MIN_OBJECTS, Halves
from .importance import importance_posterior
from .laplace import LaplaceResult, gradient, laplace, start_walkers
from .mcmc import ChainResult, default_walkers, run_ensemble

#: Estimators of the null tests and the challenge; campaigns also offer "importance".
MODES = ("fast", "mcmc")
CAMPAIGN_MODES = ("fast", "importance", "mcmc")
#: Step cap of one MCMC fit of a mock (the run configuration's cap is for the real data, where
#: one fit may take minutes; a campaign fits thousands). A capped chain is flagged converged=False.
CAMPAIGN_MAX_STEPS = 3000
_Z68 = stats.norm.ppf(0.84)
_Z95 = stats.norm.ppf(0.975)


@dataclass(frozen=True)
class KEstimate:
    """What a fit says about k.

    Attributes
    ----------
    k : float, MAP (fast mode) or posterior median (MCMC mode)
    k_std : float, Laplace or posterior standard deviation
    interval68, interval95 : tuple (low, high), central intervals
    converged : bool, a sound Laplace approximation (fast) or a chain longer than the required
        number of autocorrelation times (MCMC)
    tau_max : float, largest autocorrelation time in steps (NaN in fast mode)
    n_steps : int, chain length (0 in fast mode)
    k_draws : ndarray or None, posterior draws of k when asked for
    path : str, which estimator ran: "laplace", "importance", "short chain" (importance weights
        degenerate) or "mcmc"
    ess_fraction : float, effective sample size over draws of the importance weights (NaN otherwise)
    """

    k: float
    k_std: float
    interval68: tuple
    interval95: tuple
    converged: bool
    tau_max: float = float("nan")
    n_steps: int = 0
    k_draws: np.ndarray | None = None
    path: str = "laplace"
    ess_fraction: float = float("nan")

    def as_dict(self) -> dict:
        """JSON-like form (intervals as lists); ``k_draws`` only when present."""
        out = {"k": self.k, "k_std": self.k_std, "interval68": list(self.interval68),
               "interval95": list(self.interval95), "converged": self.converged,
               "tau_max": self.tau_max, "n_steps": self.n_steps, "path": self.path,
               "ess_fraction": self.ess_fraction}
        if self.k_draws is not None:
            out["k_draws"] = self.k_draws
        return out


def sample_posterior(model, approx: LaplaceResult, sampler: SamplerOptions, *, seed=None,
                     max_steps: int | None = None, chain_path=None, on_check=None,
                     chain_attrs: dict | None = None, parallel: bool = False) -> ChainResult:
    """The emcee run of `cosmogrow fit`: walkers drawn from the Laplace approximation.

    Parameters
    ----------
    model : CoupledGrowthModel
    approx : LaplaceResult of the model
    sampler : config.SamplerOptions (walkers, autocorrelation rule, check interval, step cap)
    seed : int or SeedSequence; child 0 seeds the walkers, child 1 the sampler
    max_steps : int, optional; overrides ``sampler.max_steps``
    chain_path, on_check, chain_attrs : see `inference.mcmc.run_ensemble`
    parallel : bool; from `forked.HALVES_MIN_OBJECTS` objects each half-ensemble is evaluated in two
        calls (`forked.Halves`), the second in a forked child when True (the same chain either way)
    """
    walker_seed, sampler_seed = child_seeds(seed, 2)
    start = start_walkers(model, approx, default_walkers(model.ndim, sampler.walkers), make_rng(walker_seed))
    log_prob = model.log_prob
    if len(model.design.m_obs) >= HALVES_MIN_OBJECTS:  # the same numbers with or without a child
        log_prob = Halves(model.log_prob, model.ndim, enabled=parallel)
    try:
        return run_ensemble(log_prob, start,
                            max_steps=int(sampler.max_steps if max_steps is None else max_steps),
                            autocorr_factor=sampler.autocorr_factor, check_every=sampler.check_every,
                            chain_path=chain_path, seed=sampler_seed, on_check=on_check,
                            chain_attrs=chain_attrs)
    finally:
        if isinstance(log_prob, Halves):
            log_prob.close()


def estimate_k(model, *, mode: str = "fast", sampler: SamplerOptions = SamplerOptions(), seed=None,
               max_steps: int = CAMPAIGN_MAX_STEPS, n_draws: int = 0) -> KEstimate:
    """Fit a model and reduce the result to k.

    Parameters
    ----------
    model : CoupledGrowthModel
    mode : "fast" (MAP + Laplace Gaussian), "importance" (the Laplace approximation corrected to the
        exact posterior by importance sampling when a selection is modelled; a short chain when the
        weights degenerate) or "mcmc" (emcee as `cosmogrow fit`, capped)
    sampler : config.SamplerOptions of the run (walkers, autocorrelation rule)
    seed : int or SeedSequence; children 0, 1, 2 seed the walkers, the sampler and the draws
    max_steps : int, step cap of the MCMC
    n_draws : int, posterior draws of k to return (simulation-based calibration): Laplace Gaussian
        draws in fast mode, evenly spaced chain draws in MCMC mode

    Raises
    ------
    ConfigError
        An unknown mode.
    """
    if mode not in CAMPAIGN_MODES:
        raise ConfigError(f"estimator.mode: expected one of {', '.join(CAMPAIGN_MODES)}, got {mode!r}")
    approx = laplace(model)
    i = model.index_k
    walker_seed, _, draw_seed = child_seeds(seed, 3)
    if mode == "fast" or (mode == "importance" and model.selection is None):
        k_map, k_std = float(approx.theta[i]), float(approx.std[i])
        draws = make_rng(draw_seed).normal(k_map, k_std, int(n_draws)) if n_draws else None
        return KEstimate(k=k_map, k_std=k_std,
                         interval68=(k_map - _Z68 * k_std, k_map + _Z68 * k_std),
                         interval95=(k_map - _Z95 * k_std, k_map + _Z95 * k_std),
                         converged=laplace_is_sound(model, approx), k_draws=draws)
    if mode == "importance":
        weighted = importance_posterior(model, approx, make_rng(walker_seed))
        if weighted.adequate:
            q = weighted.quantiles(i)
            draws = weighted.resample(i, int(n_draws), make_rng(draw_seed)) if n_draws else None
            return KEstimate(k=float(q[2]), k_std=weighted.std(i), interval68=(float(q[1]), float(q[3])),
                             interval95=(float(q[0]), float(q[4])),
                             converged=laplace_is_sound(model, approx), k_draws=draws,
                             path="importance", ess_fraction=weighted.ess_fraction)
    chain = sample_posterior(model, approx, sampler, seed=seed, max_steps=max_steps)
    k = chain.samples[:, i]
    q = np.percentile(k, [2.5, 16, 50, 84, 97.5])
    # evenly spaced over the (step-major) flat chain, i.e. spread over the whole run
    draws = k[np.linspace(0, len(k) - 1, int(n_draws)).round().astype(int)] if n_draws else None
    return KEstimate(k=float(q[2]), k_std=float(np.std(k, ddof=1)),
                     interval68=(float(q[1]), float(q[3])), interval95=(float(q[0]), float(q[4])),
                     converged=bool(chain.converged), tau_max=float(chain.tau_max),
                     n_steps=int(chain.n_steps), k_draws=draws,
                     path="mcmc" if mode == "mcmc" else "short chain")


def laplace_is_sound(model, approx: LaplaceResult, tolerance: float = 0.01) -> bool:
    """Whether a MAP + Laplace result can be trusted: minus the Hessian is positive definite and
    the Newton step from the MAP is below `tolerance` posterior standard deviations in every
    parameter. (L-BFGS-B's own flag is not used: it often reports an abnormal line-search end
    exactly at the optimum, where a Nelder-Mead polish moves no parameter by 1e-7.)"""
    curvature = -np.asarray(approx.hessian)
    if not np.all(np.isfinite(curvature)) or np.any(np.linalg.eigvalsh(curvature) <= 0):
        return False
    step = np.linalg.solve(curvature, gradient(model, approx.theta))
    return bool(np.all(np.abs(step) < tolerance * approx.std))
