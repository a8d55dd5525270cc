"""Estimate a dynamic factor model: `fit(diary, spec, options) -> FitResult`.

Window estimators maximise the window pseudo-log-likelihood (models.objective) with
L-BFGS-B on scaled parameters (variances bounded at 0, inadmissible trial points rejected),
then take Newton steps with the observed information (forward differences of the analytic
gradient), which also gives the approximate standard errors: Cov = (-d2 loglik)^-1.
The "exact" estimator (Kalman filter likelihood of the whole series) lives in models.exact.
"""

from __future__ import annotations

import time

import numpy as np
from threadpoolctl import threadpool_limits

from lagwise.models.diary import Diary
from lagwise.models.errors import EstimationError, SpecError
from lagwise.models.fitindices import fit_indices
from lagwise.models.lyapunov import spectral_radius, stationary_covariance
from lagwise.models.objective import WindowObjective
from lagwise.models.optimise import (covariance_from_hessian, interior, maximise, newton_polish,
                              observed_hessian, parameter_scales)
from lagwise.models.progress import Monitor, checkpoint
from lagwise.models.results import FitResult, Parameter
from lagwise.models.spec import ESTIMATORS, MISSING, FitOptions, ModelSpec
from lagwise.models.windows import lag_windows

MIN_WINDOWS_PER_PARAMETER = 5.0


def fit(diary: Diary, spec: ModelSpec, options: FitOptions = FitOptions(),
        monitor: Monitor | None = None) -> FitResult:
    """Estimate `spec` on `diary` (see module docstring). Raises SpecError for a model that
    cannot be estimated, EstimationError when no estimate can be produced, Cancelled."""
    if options.estimator not in ESTIMATORS:
        raise SpecError(f"Unknown estimator '{options.estimator}' (choose {', '.join(ESTIMATORS)}).")
    if options.missing not in MISSING:
        raise SpecError(f"Unknown missing-data handling '{options.missing}' (choose fiml or listwise).")
    notes = spec.validate(diary.items)
    # the matrices are small: threaded BLAS only adds overhead (measured 10x slower on 2 cores)
    with threadpool_limits(limits=1, user_api="blas"):
        if options.estimator == "exact":
            from lagwise.models.exact import fit_exact
            return fit_exact(diary, spec, options, monitor, notes)
        checkpoint(monitor, 0.0, "Building lag windows")
        started = time.perf_counter()
        windows = lag_windows(diary.select(spec.items), options.window_depth(spec))
        objective = WindowObjective(windows, spec, options)
        return estimate_windows(objective, notes, diary.n_occasions, started, monitor)


def estimate_windows(objective: WindowObjective, notes: list[str], n_occasions: int,
                     started: float, monitor: Monitor | None = None) -> FitResult:
    """Maximise the window pseudo-likelihood of a prepared objective; build the result."""
    layout, spec, options = objective.layout, objective.spec, objective.options
    n, n_free = objective.n_rows, layout.n_free
    width = objective.data.width
    if n < 2:
        raise EstimationError("Too few usable lag windows to estimate the model "
                              f"({n}; check the time settings and missing prompts).")
    moments = width * (width + 3) // 2
    if n_free > moments:
        raise SpecError(f"The model has {n_free} free parameters but the lag windows give only "
                        f"{moments} moments: free fewer paths or use fewer states.")
    flags: list[str] = []
    if n < MIN_WINDOWS_PER_PARAMETER * n_free:
        flags.append(f"Only {n} usable windows for {n_free} free parameters (fewer than about "
                     f"{MIN_WINDOWS_PER_PARAMETER:g} per parameter): estimates will be unstable.")
    checkpoint(monitor, 0.02, "Start values")
    theta0 = objective.start()
    theta, converged, message, iterations = maximise(objective, theta0, options.max_iter, monitor)
    checkpoint(monitor, 0.8, "Standard errors")
    hessian = observed_hessian(objective, theta, monitor)
    theta, hessian, improved = newton_polish(objective, theta, hessian)
    ll, grad = objective.loglik_and_gradient(theta)
    free_interior = interior(objective, theta)
    cov, se_ok = covariance_from_hessian(hessian, free_interior)
    scale = np.abs(parameter_scales(objective, theta0))
    grad_ok = np.max(np.abs(grad * scale)[free_interior]) / n < 1e-3 if free_interior.any() else True
    if converged and not grad_ok:
        converged, message = False, "the gradient is not close to zero at the final estimate"
    if converged and not se_ok:
        flags.append("The information matrix is not positive definite: the model may not be "
                     "identified; standard errors are not available for all parameters.")
    checkpoint(monitor, 0.9, "Fit indices")
    mats = objective.matrices(theta)
    imp = objective.implied(theta)
    mu_sat, sigma_sat, ll_sat, sat_ok = objective.data.saturated()
    if not sat_ok:
        flags.append("The saturated window model did not converge: chi-square-based indices are approximate.")
    fit = fit_indices(ll, ll_sat, objective.data.independence_loglik(), n_free, width, n,
                      sigma_sat, imp.sigma)
    rho = spectral_radius(list(mats.lagged)) if layout.q else 0.0
    k = layout.k
    if layout.q and rho < 1.0:
        latent = stationary_covariance(list(mats.lagged), mats.psi)
    else:
        latent = imp.phi_xi[:k, :k]
    sigma0 = mats.lam @ latent @ mats.lam.T + np.diag(mats.theta)
    flags += solution_flags(objective, theta, rho, sigma0)
    parameters = parameter_table(objective, theta, cov, latent, sigma0)
    checkpoint(monitor, 1.0, "Done")
    return FitResult(
        spec=spec, options=options, estimator=options.estimator, converged=converged,
        message=message, iterations=iterations, seconds=time.perf_counter() - started,
        n_windows=n, n_occasions=n_occasions, parameters=tuple(parameters), fit=fit,
        loadings=mats.lam, intercepts=mats.nu, unique=mats.theta,
        lagged=tuple(mats.lagged[l] for l in range(layout.q)), innovation=mats.psi,
        latent_cov=latent, r_squared=1.0 - mats.theta / np.diag(sigma0), spectral_radius=rho,
        flags=tuple(flags), extras={"notes": list(notes), "newton_steps": improved,
                                    "depth": objective.depth, "missing": options.missing},
    )


# ----- reporting ---------------------------------------------------------------------------
def solution_flags(objective: WindowObjective, theta: np.ndarray, rho: float,
                    sigma0: np.ndarray) -> list[str]:
    flags = []
    layout = objective.layout
    if layout.q:
        if rho >= 1.0:
            flags.append(f"Not stationary: the spectral radius of the lagged paths is {rho:.3f} (1 or "
                         "more), so the states would drift without bound; these estimates do not describe "
                         "a stable process.")
        elif rho > 0.99:
            flags.append(f"Nearly non-stationary: spectral radius {rho:.4f}, at the stationarity boundary.")
    for n, e in enumerate(layout.free_entries):
        if e.block == "theta" and theta[n] <= 1e-6 * sigma0[e.index[0], e.index[0]]:
            flags.append(f"Boundary (Heywood) estimate: the unique variance of '{e.to}' is 0.")
        elif e.block in ("psi", "pv") and e.is_variance and theta[n] <= 1e-6 * float(np.mean(objective.item_var)):
            flags.append(f"Boundary estimate: the innovation variance of '{e.to}' is 0.")
        elif e.block == "pcor" and abs(theta[n]) > 0.99:
            flags.append(f"Boundary estimate: partial correlation {e.from_}-{e.to} is near +-1.")
    return flags


def parameter_table(objective: WindowObjective, theta: np.ndarray, cov: np.ndarray,
                     latent: np.ndarray, sigma0: np.ndarray) -> list[Parameter]:
    layout = objective.layout
    free_pos = {id(e): n for n, e in enumerate(layout.free_entries)}
    mats = layout.unpack(theta)
    sd_eta = np.sqrt(np.clip(np.diag(latent), 1e-300, None))
    sd_y = np.sqrt(np.clip(np.diag(sigma0), 1e-300, None))
    out = []
    for e in layout.entries:
        n = free_pos.get(id(e))
        value = float(theta[n]) if n is not None else e.value
        se = None
        if n is not None and np.isfinite(cov[n, n]) and cov[n, n] > 0:
            se = float(np.sqrt(cov[n, n]))
        out.append(Parameter(kind=e.kind, from_=e.from_, to=e.to, estimate=value, se=se,
                             standardized=_standardized(e, value, mats, sd_eta, sd_y),
                             free=e.free, lag=e.lag))
    return out


def _standardized(e, value: float, mats, sd_eta: np.ndarray, sd_y: np.ndarray) -> float | None:
    """Scale by stationary standard deviations of the states (sd_eta) and items (sd_y)."""
    if e.block == "lam":
        i, j = e.index
        return value * sd_eta[j] / sd_y[i]
    if e.block == "nu":
        return value / sd_y[e.index[0]]
    if e.block == "theta":
        return value / sd_y[e.index[0]] ** 2
    if e.block == "d" or e.block == "pcor":
        return value
    if e.block == "B":
        _, i, j = e.index
        return value * sd_eta[j] / sd_eta[i]
    if e.block == "psi":
        i, j = e.index
        return value / (sd_eta[i] * sd_eta[j])
    if e.block == "pv":
        i = e.index[0]
        return value / sd_eta[i] ** 2
    if e.block == "phif":
        a, b = e.index
        return value / np.sqrt(mats.phif[a, a] * mats.phif[b, b])
    if e.block == "c":
        return value / sd_eta[e.index[0]]
    return None
