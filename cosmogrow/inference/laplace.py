"""Point estimates: the maximum a posteriori and its Laplace (Hessian) approximation.

All derivatives are finite differences evaluated in one vectorised call of the model's log_prob.
"""

from dataclasses import dataclass

import numpy as np
from scipy import optimize

_INTERIOR = 1e-6


@dataclass(frozen=True)
class LaplaceResult:
    """MAP and Gaussian approximation of a posterior."""

    theta: np.ndarray       # MAP, shape (ndim,)
    log_prob: float         # log posterior at the MAP
    covariance: np.ndarray  # inverse of minus the Hessian of log_prob
    hessian: np.ndarray
    success: bool

    @property
    def std(self):
        return np.sqrt(np.clip(np.diag(self.covariance), 0, None))


def _steps(model, theta, scale):
    room = np.minimum(theta - model.lower, model.upper - theta)
    return np.maximum(np.minimum(scale, 0.45 * room), 1e-7)


def gradient(model, theta, scale=None):
    """Central-difference gradient of log_prob in one batched call."""
    points, h = _gradient_points(model, theta, scale)
    return _differences(model.log_prob(points), h)


def value_and_gradient(model, theta):
    """log_prob at `theta` and `gradient(model, theta)`, in one call of the model when it accepts
    `batches` (then bit for bit the values of the two separate calls), else in two."""
    points, h = _gradient_points(model, theta, None)
    if not getattr(model, "supports_batches", False):
        return model.log_prob(theta[None, :])[0], _differences(model.log_prob(points), h)
    values = model.log_prob(np.vstack([theta[None, :], points]), batches=(1, len(points)))
    return values[0], _differences(values[1:], h)


def _gradient_points(model, theta, scale):
    ndim = len(theta)
    h = _steps(model, theta, 1e-5 * np.maximum(np.abs(theta), 1.0) if scale is None else scale)
    points = np.repeat(theta[None, :], 2 * ndim, axis=0)
    points[np.arange(ndim), np.arange(ndim)] += h
    points[ndim + np.arange(ndim), np.arange(ndim)] -= h
    return points, h


def _differences(values, h):
    ndim = len(h)
    return (values[:ndim] - values[ndim:]) / (2 * h)


def hessian_points(model, theta, scale):
    """The 2 d^2 + 1 points of the finite-difference Hessian and what `assemble_hessian` needs.

    Returns
    -------
    points : ndarray (2 d^2 + 1, d); steps : ndarray (d,); pairs : list of (i, j), i < j
    """
    ndim = len(theta)
    h = _steps(model, theta, scale)
    eye = np.eye(ndim) * h
    pts = [theta]
    pts += [theta + eye[i] for i in range(ndim)] + [theta - eye[i] for i in range(ndim)]
    pairs = [(i, j) for i in range(ndim) for j in range(i + 1, ndim)]
    for i, j in pairs:
        pts += [theta + eye[i] + eye[j], theta + eye[i] - eye[j],
                theta - eye[i] + eye[j], theta - eye[i] - eye[j]]
    return np.array(pts), h, pairs


def assemble_hessian(values, h, pairs):
    """Hessian from a function's values at `hessian_points` (central differences)."""
    ndim = len(h)
    f0, plus, minus = values[0], values[1:ndim + 1], values[ndim + 1:2 * ndim + 1]
    hess = np.diag((plus - 2 * f0 + minus) / h**2)
    cross = values[2 * ndim + 1:].reshape(-1, 4)
    for (i, j), (pp, pm, mp, mm) in zip(pairs, cross):
        hess[i, j] = hess[j, i] = (pp - pm - mp + mm) / (4 * h[i] * h[j])
    return hess


def hessian(model, theta, scale):
    """Finite-difference Hessian of log_prob, all 2 d^2 + 1 points evaluated in one call."""
    points, h, pairs = hessian_points(model, theta, scale)
    return assemble_hessian(model.log_prob(points), h, pairs)


def find_map(model, start=None, fixed=None):
    """Maximise log_prob with L-BFGS-B.

    Parameters
    ----------
    model : CoupledGrowthModel
    start : array, optional; default model.map_start if set, else model.initial_guess()
    fixed : dict {index: value}, optional; parameters held fixed (for profiles)

    Returns
    -------
    theta : ndarray, log_prob : float, success : bool
    """
    if start is None:
        start = model.map_start if model.map_start is not None else model.initial_guess()
    theta0 = np.array(start, dtype=float)
    fixed = fixed or {}
    for index, value in fixed.items():
        theta0[index] = value
    free = np.array([i for i in range(model.ndim) if i not in fixed], dtype=int)
    span = np.where(np.isfinite(model.upper - model.lower), model.upper - model.lower, 1.0)
    low = np.where(np.isfinite(model.lower), model.lower + _INTERIOR * span, -np.inf)[free]
    high = np.where(np.isfinite(model.upper), model.upper - _INTERIOR * span, np.inf)[free]
    theta0[free] = np.clip(theta0[free], low, high)

    def negative(params):
        theta = theta0.copy()
        theta[free] = params
        value, slope = value_and_gradient(model, theta)
        if not np.isfinite(value):
            return 1e300, np.zeros_like(params)
        return -value, -slope[free]

    bounds = list(zip(np.where(np.isfinite(low), low, None), np.where(np.isfinite(high), high, None)))
    best = None
    start_points = [theta0[free]]
    for attempt in range(3):
        result = optimize.minimize(negative, start_points[-1], jac=True, method="L-BFGS-B",
                                   bounds=bounds, options={"maxiter": 2000, "ftol": 1e-12, "gtol": 1e-6})
        if best is None or result.fun < best.fun:
            best = result
        if result.success or np.array_equal(result.x, start_points[-1]):
            break  # converged, or a retry that did not move: another would repeat it exactly
        start_points.append(result.x)
    theta = theta0.copy()
    theta[free] = best.x
    return theta, -float(best.fun), bool(best.success)


def laplace(model, start=None):
    """MAP and the Gaussian approximation of the posterior around it (two passes of step sizes)."""
    theta, log_prob, success = find_map(model, start)
    scale = 1e-3 * np.maximum(np.abs(theta), 0.1)
    covariance = hess = None
    for _ in range(2):
        hess = hessian(model, theta, scale)
        covariance = _safe_inverse(-hess)
        scale = 0.2 * np.sqrt(np.clip(np.diag(covariance), 1e-12, None))
    return LaplaceResult(theta=theta, log_prob=log_prob, covariance=covariance, hessian=hess, success=success)


def _safe_inverse(matrix):
    try:
        inverse = np.linalg.inv(matrix)
    except np.linalg.LinAlgError:
        inverse = np.linalg.pinv(matrix)
    if not np.all(np.isfinite(inverse)) or np.any(np.diag(inverse) <= 0):
        inverse = np.linalg.pinv(matrix)
        diag = np.diag(inverse).copy()
        diag[diag <= 0] = 1e-6
        np.fill_diagonal(inverse, diag)
    return inverse


def start_walkers(model, laplace_result, n_walkers, rng):
    """Walkers drawn from the Laplace approximation, pulled inside the prior."""
    cov = laplace_result.covariance
    start = rng.multivariate_normal(laplace_result.theta, cov, size=n_walkers, method="eigh")
    span = model.upper - model.lower
    margin = np.where(np.isfinite(span), 1e-6 * span, 0)
    start = np.clip(start, model.lower + margin, model.upper - margin)
    bad = ~np.isfinite(model.log_prob(start))
    start[bad] = laplace_result.theta + 1e-4 * rng.standard_normal((bad.sum(), model.ndim))
    return start
