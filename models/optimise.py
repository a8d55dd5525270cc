"""Maximum likelihood for any Lagwise objective: scaled L-BFGS-B, Newton polish, observed
information and standard errors.

An objective is anything with `layout` (models.parameters.ParameterLayout), `item_var`,
`n_rows`, `loglik(theta)` and `loglik_and_gradient(theta)` — the window pseudo-likelihood
(models.objective) and the exact Kalman-filter likelihood (models.exact). L-BFGS-B works on
parameters divided by their typical size (`ParameterLayout.sizes`), with variances bounded
at 0; inadmissible trial points (not stationary, not positive definite) get a large value so
the line search backs off. The observed information comes from forward differences of the
analytic gradient, and (-H)^-1 over the parameters not held at a bound gives the
approximate covariance.
"""

from __future__ import annotations

from typing import Protocol

import numpy as np
from scipy.optimize import minimize

from lagwise.models.implied import NotAdmissible
from lagwise.models.parameters import ParameterLayout
from lagwise.models.progress import Monitor, checkpoint


class Likelihood(Protocol):
    layout: ParameterLayout
    item_var: np.ndarray
    n_rows: int

    def loglik(self, theta: np.ndarray) -> float: ...

    def loglik_and_gradient(self, theta: np.ndarray) -> tuple[float, np.ndarray]: ...


PRECISE = {"ftol": 1e-12, "gtol": 1e-8}
ROUGH = {"ftol": 1e-5, "gtol": 1e-3}   # when Newton steps with the information finish the job


def maximise(objective: Likelihood, theta0: np.ndarray, sizes: np.ndarray, max_iter: int,
             monitor: Monitor | None, precise: bool = True) -> tuple[np.ndarray, bool, str, int]:
    """L-BFGS-B on theta / sizes, to PRECISE tolerances or ROUGH ones (then `newton_polish`
    takes over). Returns the estimate, whether the optimiser stopped well (success, or a line
    search that could not improve: L-BFGS-B's usual stop at an optimum in floating point;
    `models.solution.judge` checks the gradient either way), its message and the number of
    iterations."""
    n = max(objective.n_rows, 1)
    penalty = abs(objective.loglik(theta0)) / n * 10.0 + 1e3
    count = [0]

    def f(x: np.ndarray) -> tuple[float, np.ndarray]:
        try:
            ll, g = objective.loglik_and_gradient(x * sizes)
        except (NotAdmissible, np.linalg.LinAlgError):
            return penalty, np.zeros_like(x)
        return -ll / n, -g * sizes / n

    def callback(xk: np.ndarray) -> None:
        count[0] += 1
        checkpoint(monitor, 1 - 1 / (1 + count[0] / 40), f"Iteration {count[0]}")

    lower, upper = objective.layout.bounds()
    bounds = [(None if not np.isfinite(lo) else lo / s, None if not np.isfinite(hi) else hi / s)
              for lo, hi, s in zip(lower, upper, sizes)]
    res = minimize(f, theta0 / sizes, jac=True, method="L-BFGS-B", bounds=bounds, callback=callback,
                   options={"maxiter": max(max_iter, 1), "maxcor": 30,
                            **(PRECISE if precise else ROUGH)})
    theta = res.x * sizes
    try:
        objective.loglik(theta)
    except NotAdmissible:   # its likely cause is named by models.conditioning
        raise NotAdmissible("the optimiser ended outside the admissible region") from None
    ok = bool(res.success) or "ABNORMAL" in str(res.message).upper()
    return theta, ok, str(res.message), int(res.nit)


# What L-BFGS-B's stop messages mean, in words (matched on its message with "_" as spaces).
_STOPS = (
    (("PGTOL", "GRADIENT IS SUFFICIENTLY SMALL"),
     "The optimiser stopped because the slope of the likelihood was practically zero."),
    (("REDUCTION OF F",),
     "The optimiser stopped because further steps no longer improved the likelihood noticeably."),
    (("ITERATIONS",),
     "The optimiser reached its iteration limit before the estimates settled: allow more "
     "iterations or simplify the model."),
    (("EVALUATIONS",),
     "The optimiser reached its limit of likelihood evaluations before the estimates settled: "
     "allow more iterations or simplify the model."),
    (("ABNORMAL", "LNSRCH", "ROUNDING"),
     "The optimiser's last step could not improve the likelihood (rounding limits progress, "
     "as usual at an optimum)."),
)


def stop_sentence(message: str) -> str:
    """A plain sentence for an optimiser's stop message (the raw text stays in the JSON)."""
    words = str(message).upper().replace("_", " ")
    for keys, sentence in _STOPS:
        if any(key in words for key in keys):
            return sentence
    return "The optimiser stopped for a technical reason (its own words are in the JSON)."


def interior(objective: Likelihood, theta: np.ndarray) -> np.ndarray:
    """Free parameters not held at a bound."""
    lower, upper = objective.layout.bounds()
    at_lower = theta - lower <= 1e-7 * max(float(objective.item_var.mean()), 1.0)
    at_upper = upper - theta <= 1e-9 * np.maximum(np.abs(theta), 1.0)
    return ~(at_lower | at_upper)


def observed_information(objective: Likelihood, theta: np.ndarray, sizes: np.ndarray,
                         monitor: Monitor | None = None) -> np.ndarray:
    """Observed information -d2 loglik by forward differences of the analytic gradient (one
    gradient per parameter; steps 1e-6 x the parameter's size, backwards where a step leaves
    the region)."""
    m = theta.size
    h_mat = np.zeros((m, m))
    g0 = objective.loglik_and_gradient(theta)[1]
    for i in range(m):
        step = 1e-6 * max(abs(theta[i]), sizes[i])
        e = np.zeros(m)
        e[i] = step
        try:
            h_mat[:, i] = (objective.loglik_and_gradient(theta + e)[1] - g0) / step
        except (NotAdmissible, np.linalg.LinAlgError):
            h_mat[:, i] = (g0 - objective.loglik_and_gradient(theta - e)[1]) / step
        if i % 10 == 0:
            checkpoint(monitor, i / m, "Standard errors")
    return -0.5 * (h_mat + h_mat.T)


class ObservedInformation:
    """What an objective whose errors come from its likelihood's observed information shares
    (the exact and the continuous-time estimators): the information by forward differences of
    the analytic gradient, costly enough that the precise L-BFGS-B replaces the cheap Newton
    steps, and no pre-flight checks."""

    cheap_steps = False

    def step_information(self, theta: np.ndarray) -> None:
        return None

    def information(self, theta: np.ndarray, sizes: np.ndarray,
                    monitor: Monitor | None = None) -> np.ndarray:
        """The observed information (forward differences of the analytic gradient)."""
        return observed_information(self, theta, sizes, monitor)

    def preflight(self) -> list:
        return []


def newton_polish(objective: Likelihood, theta: np.ndarray, information: np.ndarray,
                  steps: int = 20) -> tuple[np.ndarray, int, bool]:
    """Newton steps theta += I^-1 g on the interior parameters while they raise the
    log-likelihood (I the observed or expected information at the starting point), until the
    Newton decrement g' I^-1 g falls below 1e-12 per row (the log-likelihood is then within
    about that of its maximum). Returns the estimate, the steps taken and whether the
    decrement got that small."""
    done, settled = 0, False
    lower, upper = objective.layout.bounds()
    ll, grad = objective.loglik_and_gradient(theta)
    for _ in range(steps):
        free = interior(objective, theta)
        if not free.any():
            break
        sub = information[np.ix_(free, free)]
        try:
            np.linalg.cholesky(sub)
        except np.linalg.LinAlgError:
            break
        step = np.zeros_like(theta)
        step[free] = np.linalg.solve(sub, grad[free])
        if grad[free] @ step[free] < 1e-12 * max(objective.n_rows, 1):
            settled = True
            break
        trial = theta + step
        try:
            ll_new, grad_new = objective.loglik_and_gradient(trial)
        except NotAdmissible:
            break
        if not ll_new > ll - 1e-12 * abs(ll) or np.any(trial < lower) or np.any(trial > upper):
            break
        theta, ll, grad = trial, ll_new, grad_new
        done += 1
        if np.max(np.abs(step)) < 1e-10:
            settled = True
            break
    return theta, done, settled


def covariance_from_information(information: np.ndarray, interior: np.ndarray
                                ) -> tuple[np.ndarray, bool]:
    """I^-1 over interior parameters; NaN rows for parameters at a bound."""
    m = information.shape[0]
    cov = np.full((m, m), np.nan)
    idx = np.flatnonzero(interior)
    if idx.size == 0:
        return cov, True
    info = information[np.ix_(idx, idx)]
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
