"""Maximum likelihood for any Lagwise objective: scaled L-BFGS-B, Newton polish, observed
information and standard errors.

An objective is anything with `layout` (models.parameters.ParameterLayout), `item_var`,
`n_rows`, `loglik(theta)` and `loglik_and_gradient(theta)` — the window pseudo-likelihood
(models.objective) and the exact Kalman-filter likelihood (models.exact). L-BFGS-B works on
parameters divided by their typical size, with variances bounded at 0; inadmissible trial
points (not stationary, not positive definite) get a large value so the line search backs
off. The observed information comes from forward differences of the analytic gradient, and
(-H)^-1 over the parameters not held at a bound gives the approximate covariance.
"""

from __future__ import annotations

from typing import Protocol

import numpy as np
from scipy.optimize import minimize

from lagwise.models.errors import EstimationError
from lagwise.models.implied import NotAdmissible
from lagwise.models.parameters import ParameterLayout
from lagwise.models.progress import Monitor, checkpoint


class Objective(Protocol):
    layout: ParameterLayout
    item_var: np.ndarray
    n_rows: int

    def loglik(self, theta: np.ndarray) -> float: ...

    def loglik_and_gradient(self, theta: np.ndarray) -> tuple[float, np.ndarray]: ...


def parameter_scales(objective: Objective, theta0: np.ndarray) -> np.ndarray:
    """Typical size of each parameter, so the optimiser works on numbers near 1."""
    sd = np.sqrt(np.maximum(objective.item_var, 1e-8))
    out = np.empty_like(theta0)
    for n, e in enumerate(objective.layout.free_entries):
        if e.block == "nu":
            out[n] = sd[e.index[0]]
        elif e.block == "theta":
            out[n] = objective.item_var[e.index[0]]
        elif e.block in ("psi", "pv", "phif"):
            out[n] = max(abs(theta0[n]), 1e-3 * float(np.mean(objective.item_var)))
        elif e.block == "lam":
            out[n] = max(abs(theta0[n]), 0.1)
        elif e.block == "c":
            out[n] = float(np.sqrt(np.mean(objective.item_var)))
        else:
            out[n] = 0.5
    return out


def maximise(objective: Objective, theta0: np.ndarray, max_iter: int,
              monitor: Monitor | None) -> tuple[np.ndarray, bool, str, int]:
    n = max(objective.n_rows, 1)
    s = parameter_scales(objective, theta0)
    penalty = [abs(objective.loglik(theta0)) / n * 10.0 + 1e3]
    count = [0]

    def f(x: np.ndarray) -> tuple[float, np.ndarray]:
        try:
            ll, g = objective.loglik_and_gradient(x * s)
        except (NotAdmissible, np.linalg.LinAlgError):
            return penalty[0], np.zeros_like(x)
        return -ll / n, -g * s / n

    def callback(xk: np.ndarray) -> None:
        count[0] += 1
        checkpoint(monitor, 0.05 + 0.75 * (1 - 1 / (1 + count[0] / 40)), f"Iteration {count[0]}")

    bounds = [(None if lo is None else lo / sc, None if hi is None else hi / sc)
              for (lo, hi), sc in zip(objective.layout.bounds(), s)]
    res = minimize(f, theta0 / s, jac=True, method="L-BFGS-B", bounds=bounds, callback=callback,
                   options={"maxiter": max_iter, "maxcor": 30, "ftol": 1e-12, "gtol": 1e-8})
    theta = res.x * s
    try:
        objective.loglik(theta)
    except NotAdmissible:
        raise EstimationError("The optimiser ended outside the admissible region; try fewer free "
                              "paths or the other estimator.") from None
    ok = bool(res.success) or "ABNORMAL" in str(res.message).upper()
    return theta, ok, str(res.message), int(res.nit)


def interior(objective: Objective, theta: np.ndarray) -> np.ndarray:
    """Free parameters not held at a bound."""
    out = np.ones(theta.size, dtype=bool)
    for n, (lo, hi) in enumerate(objective.layout.bounds()):
        scale = max(abs(theta[n]), 1.0)
        if lo is not None and theta[n] - lo <= 1e-7 * max(objective.item_var.mean(), 1.0):
            out[n] = False
        if hi is not None and hi - theta[n] <= 1e-9 * scale:
            out[n] = False
    return out


def observed_hessian(objective: Objective, theta: np.ndarray, monitor: Monitor | None) -> np.ndarray:
    """Observed information by forward differences of the analytic gradient (one gradient per
    parameter; steps 1e-6 x the parameter's scale, backwards where a step leaves the region)."""
    m = theta.size
    h_mat = np.zeros((m, m))
    scale = parameter_scales(objective, theta)
    g0 = objective.loglik_and_gradient(theta)[1]
    for i in range(m):
        step = 1e-6 * max(abs(theta[i]), scale[i])
        e = np.zeros(m)
        e[i] = step
        try:
            h_mat[:, i] = (objective.loglik_and_gradient(theta + e)[1] - g0) / step
        except (NotAdmissible, np.linalg.LinAlgError):
            h_mat[:, i] = (g0 - objective.loglik_and_gradient(theta - e)[1]) / step
        if i % 10 == 0:
            checkpoint(monitor, 0.8 + 0.1 * i / m, "Standard errors")
    return 0.5 * (h_mat + h_mat.T)


def newton_polish(objective: Objective, theta: np.ndarray, hessian: np.ndarray,
                   steps: int = 3) -> tuple[np.ndarray, np.ndarray, int]:
    """Newton steps on the interior parameters while they raise the log-likelihood."""
    done = 0
    ll, grad = objective.loglik_and_gradient(theta)
    for _ in range(steps):
        free = interior(objective, theta)
        if not free.any():
            break
        sub = hessian[np.ix_(free, free)]
        try:
            np.linalg.cholesky(-sub)
        except np.linalg.LinAlgError:
            break
        step = np.zeros_like(theta)
        step[free] = -np.linalg.solve(sub, grad[free])
        trial = theta + step
        try:
            ll_new, grad_new = objective.loglik_and_gradient(trial)
        except NotAdmissible:
            break
        if not ll_new > ll - 1e-12 * abs(ll) or not np.all(_within_bounds(objective, trial)):
            break
        theta, ll, grad = trial, ll_new, grad_new
        done += 1
        if np.max(np.abs(step)) < 1e-10:
            break
    return theta, hessian, done


def _within_bounds(objective: Objective, theta: np.ndarray) -> np.ndarray:
    out = np.ones(theta.size, dtype=bool)
    for n, (lo, hi) in enumerate(objective.layout.bounds()):
        out[n] = (lo is None or theta[n] >= lo) and (hi is None or theta[n] <= hi)
    return out


def covariance_from_hessian(hessian: np.ndarray, interior: np.ndarray) -> tuple[np.ndarray, bool]:
    """(-H)^-1 over interior parameters; NaN rows for parameters at a bound."""
    m = hessian.shape[0]
    cov = np.full((m, m), np.nan)
    idx = np.flatnonzero(interior)
    if idx.size == 0:
        return cov, True
    info = -hessian[np.ix_(idx, idx)]
    try:
        np.linalg.cholesky(info)
    except np.linalg.LinAlgError:
        w, v = np.linalg.eigh(info)
        ok = w > 1e-10 * max(abs(w).max(), 1e-300)
        inv = (v[:, ok] / w[ok]) @ v[:, ok].T
        cov[np.ix_(idx, idx)] = inv
        bad = np.abs(v[:, ~ok]).max(axis=1) > 1e-3 if (~ok).any() else np.zeros(idx.size, bool)
        cov[idx[bad], :] = np.nan
        cov[:, idx[bad]] = np.nan
        return cov, False
    cov[np.ix_(idx, idx)] = np.linalg.inv(info)
    return cov, True
