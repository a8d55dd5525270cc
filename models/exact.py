"""The `exact` estimator: maximum likelihood of the whole series by the Kalman filter.

The model of DESIGN.md section 2 as a linear Gaussian state-space model (models.kalman): every
answered prompt is used, missed prompts are handled by the filter, and each segment restarts
from the stationary distribution (or, with `FitOptions.night_gap`, the days are joined with
that many missed prompts in between, so the states carry over the night). Start values come
from the stationary window estimate (its optimum only); optimisation, standard errors
(observed information) and the parameter table are shared with the window estimators.
Log-likelihood, AIC and BIC are those of the series (BIC with n = answered occasions), so they
compare models properly. The filter plan (models.kalman.filter_plan) is built once per fit.
"""

from __future__ import annotations

import time
from dataclasses import replace

import numpy as np

from lagwise.models.diary import Diary
from lagwise.models.estimate import parameter_table, solution_flags
from lagwise.models.errors import EstimationError
from lagwise.models.fitindices import fit_indices
from lagwise.models.implied import NotAdmissible
from lagwise.models.kalman import filter_plan, kalman_gradient, kalman_loglik, kalman_smooth
from lagwise.models.lyapunov import spectral_radius, stationary_covariance
from lagwise.models.objective import WindowObjective
from lagwise.models.optimise import (covariance_from_hessian, interior, maximise, newton_polish,
                              observed_hessian)
from lagwise.models.parameters import Gradients, ParameterLayout
from lagwise.models.progress import Monitor, checkpoint, scaled
from lagwise.models.results import CAUTION_IDIOGRAPHIC, FitResult
from lagwise.models.spec import FitOptions, ModelSpec
from lagwise.models.windows import lag_windows

CAUTION_EXACT_SE = ("Standard errors come from the observed information of the exact likelihood; "
                    "with a few hundred prompts they are approximate.")


class ExactObjective:
    """Kalman-filter log-likelihood of a diary as a function of the free parameters."""

    def __init__(self, diary: Diary, spec: ModelSpec, options: FitOptions):
        self.spec, self.options = spec, options
        data = diary.select(spec.items)
        values, segment = data.values, np.asarray(data.segment)
        if options.night_gap is not None:
            values, segment = _join_days(values, segment, int(options.night_gap))
        self.values, self.segment = values, segment
        self.plan = filter_plan(values, segment)
        self.n_rows = int((~np.isnan(values)).any(axis=1).sum())
        self.item_var = np.nanvar(values, axis=0)
        self.layout = ParameterLayout(spec, self.item_var, "exact")
        self.autocorrelated = np.array([it in spec.unique_autocorrelation for it in spec.items])

    def matrices(self, theta: np.ndarray):
        return self.layout.unpack(theta)

    def _args(self, theta: np.ndarray) -> tuple:
        m = self.layout.unpack(theta)
        return m, (self.values, self.segment, m.nu, m.lam, m.theta, list(m.lagged), m.psi, m.d)

    def loglik(self, theta: np.ndarray) -> float:
        m, args = self._args(theta)
        try:
            return kalman_loglik(*args, plan=self.plan)
        except (EstimationError, np.linalg.LinAlgError):
            raise NotAdmissible("outside the admissible region") from None

    def loglik_and_gradient(self, theta: np.ndarray) -> tuple[float, np.ndarray]:
        m, args = self._args(theta)
        try:
            g = kalman_gradient(*args, autocorrelated=self.autocorrelated, plan=self.plan)
        except (EstimationError, np.linalg.LinAlgError):
            raise NotAdmissible("outside the admissible region") from None
        grads = Gradients(nu=g.intercepts, lam=g.loadings, theta=g.unique, d=g.unique_autocorrelation,
                          lagged=g.lagged, psi=g.innovation)
        return g.loglik, self.layout.gradient_vector(m, grads)


def _join_days(values: np.ndarray, segment: np.ndarray, gap: int) -> tuple[np.ndarray, np.ndarray]:
    """One segment, with `gap` unanswered occasions inserted between consecutive segments."""
    starts = np.flatnonzero(np.r_[False, segment[1:] != segment[:-1]])
    pieces = np.split(values, starts)
    blank = np.full((gap, values.shape[1]), np.nan)
    joined = [pieces[0]]
    for piece in pieces[1:]:
        joined += [blank, piece]
    out = np.vstack(joined)
    return out, np.zeros(out.shape[0], dtype=int)


def fit_exact(diary: Diary, spec: ModelSpec, options: FitOptions, monitor: Monitor | None = None,
              notes: list[str] | None = None) -> FitResult:
    """Exact maximum likelihood, started from the stationary window estimate."""
    started = time.perf_counter()
    checkpoint(monitor, 0.0, "Window estimate for start values")
    objective = ExactObjective(diary, spec, options)
    layout = objective.layout
    theta0, start_loglik = _window_start(diary, spec, options, objective,
                                         scaled(monitor, 0.0, 0.3))
    checkpoint(monitor, 0.3, "Exact likelihood")
    theta, converged, message, iterations = maximise(objective, theta0, options.max_iter,
                                                      scaled(monitor, 0.3, 0.8))
    checkpoint(monitor, 0.8, "Standard errors")
    hessian = observed_hessian(objective, theta, scaled(monitor, 0.8, 0.95))
    theta, hessian, improved = newton_polish(objective, theta, hessian)
    ll, grad = objective.loglik_and_gradient(theta)
    free_interior = interior(objective, theta)
    cov, se_ok = covariance_from_hessian(hessian, free_interior)
    flags: list[str] = []
    if converged and not se_ok:
        flags.append("The information matrix is not positive definite: the model may not be "
                     "identified; standard errors are not available for all parameters.")
    mats = layout.unpack(theta)
    rho = spectral_radius(list(mats.lagged)) if layout.q else 0.0
    latent = stationary_covariance(list(mats.lagged), mats.psi) if layout.q else mats.psi
    sigma0 = mats.lam @ latent @ mats.lam.T + np.diag(mats.theta)
    flags += solution_flags(objective, theta, rho, sigma0)
    n = objective.n_rows
    fit_ix = replace(fit_indices(ll, None, 0.0, layout.n_free, 0, n, None, sigma0), df=0, exact=True)
    states = kalman_smooth(objective.values, objective.segment, mats.nu, mats.lam, mats.theta,
                           list(mats.lagged), mats.psi, mats.d, plan=objective.plan)
    keep = _original_rows(diary, options)
    scores = {
        "filtered": states.filtered_mean[keep].tolist(),
        "filtered_sd": np.sqrt(np.clip(np.diagonal(states.filtered_cov, axis1=1, axis2=2)[keep], 0, None)).tolist(),
        "smoothed": states.smoothed_mean[keep].tolist(),
        "smoothed_sd": np.sqrt(np.clip(np.diagonal(states.smoothed_cov, axis1=1, axis2=2)[keep], 0, None)).tolist(),
    }
    checkpoint(monitor, 1.0, "Done")
    return FitResult(
        spec=spec, options=options, estimator="exact", converged=converged, message=message,
        iterations=iterations, seconds=time.perf_counter() - started, n_windows=n,
        n_occasions=diary.n_occasions, parameters=tuple(parameter_table(objective, theta, cov, latent, sigma0)),
        fit=fit_ix, loadings=mats.lam, intercepts=mats.nu, unique=mats.theta,
        lagged=tuple(mats.lagged[l] for l in range(layout.q)), innovation=mats.psi, latent_cov=latent,
        r_squared=1.0 - mats.theta / np.diag(sigma0), spectral_radius=rho, flags=tuple(flags),
        cautions=(CAUTION_IDIOGRAPHIC, CAUTION_EXACT_SE),
        extras={"notes": list(notes or []), "newton_steps": improved, "missing": "filter",
                "night_gap": options.night_gap, "state_scores": scores,
                "start_loglik_windows": start_loglik},
    )


def _window_start(diary: Diary, spec: ModelSpec, options: FitOptions, objective: ExactObjective,
                  monitor: Monitor | None) -> tuple[np.ndarray, float]:
    """Start values: the stationary window estimate (the optimum only: its standard errors and
    fit statistics are not needed here), and its window pseudo-log-likelihood."""
    window_options = replace(options, estimator="stationary", depth=None)
    windows = lag_windows(diary.select(spec.items), window_options.window_depth(spec))
    start = WindowObjective(windows, spec, window_options)
    if start.n_rows < 2:
        raise EstimationError("Too few usable lag windows for start values "
                              f"({start.n_rows}; check the time settings and missing prompts).")
    theta, _, _, _ = maximise(start, start.start(), options.max_iter, monitor)
    position = {(e.kind, e.from_, e.to): n for n, e in enumerate(start.layout.free_entries)}
    theta0 = np.array([theta[position[(e.kind, e.from_, e.to)]]
                       for e in objective.layout.free_entries])
    return theta0, start.loglik(theta)


def _original_rows(diary: Diary, options: FitOptions) -> np.ndarray:
    """Positions of the diary's occasions in the (possibly night-padded) filtered series."""
    n = diary.n_occasions
    if options.night_gap is None:
        return np.arange(n)
    seg = np.asarray(diary.segment)
    breaks = np.cumsum(np.r_[0, seg[1:] != seg[:-1]])
    return np.arange(n) + breaks * int(options.night_gap)
