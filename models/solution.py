"""From an objective to a result: the one step every estimator shares.

`solve` maximises any objective (models.optimise), polishes the optimum with Newton steps on
the observed information, judges convergence the same way for every estimator, derives the
standard errors, the stationary solution, the flags and the parameter table with the
standardized solution, and asks the objective for what only it knows (fit figures, state
scores). Convergence: the optimiser reported success (or stopped in its line search, which
L-BFGS-B does at an optimum it cannot improve in floating point) AND the gradient, scaled by
each parameter's typical size, is below 1e-3 per row at the interior parameters.
"""

from __future__ import annotations

import time
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Protocol

import numpy as np

from lagwise.models import flags as warn
from lagwise.models.blocks import Scales
from lagwise.models.conditioning import numerical_failures
from lagwise.models.estimators import FitOptions
from lagwise.models.flags import Flag
from lagwise.models.kinds import Kind
from lagwise.models.lyapunov import spectral_radius, stationary_covariance
from lagwise.models.optimise import (covariance_from_information, interior, maximise,
                                     newton_polish, stop_sentence)
from lagwise.models.parameters import Matrices, ParameterLayout
from lagwise.models.progress import Monitor, checkpoint, scaled
from lagwise.models.results import FitIndices, FitResult, Parameter
from lagwise.models.robust import sandwich
from lagwise.models.spec import ModelSpec

GRADIENT_TOLERANCE = 1e-3
Start = FitResult | Mapping[tuple[str, str, str], float] | np.ndarray | None


class Objective(Protocol):
    """What `solve` needs from an estimator's objective (models.objective, models.exact)."""

    spec: ModelSpec
    options: FitOptions
    layout: ParameterLayout
    item_var: np.ndarray
    n_rows: int
    n_occasions: int
    item_values: np.ndarray   # (prompts or windows, items): the answers, for failure messages

    def loglik(self, theta: np.ndarray) -> float: ...

    def answers_per_item(self) -> np.ndarray: ...

    def loglik_and_gradient(self, theta: np.ndarray) -> tuple[float, np.ndarray]: ...

    def start(self, monitor: Monitor | None) -> np.ndarray: ...

    def optimiser_scale(self, theta0: np.ndarray, sizes: np.ndarray,
                        monitor: Monitor | None) -> np.ndarray: ...   # at a start of its own

    def information(self, theta: np.ndarray, sizes: np.ndarray,
                    monitor: Monitor | None) -> np.ndarray: ...

    cheap_steps: bool   # step_information is cheap: Newton steps finish every optimum

    def step_information(self, theta: np.ndarray) -> np.ndarray | None: ...

    def preflight(self) -> list[Flag]: ...

    def latent_covariance(self, theta: np.ndarray, mats: Matrices, radius: float) -> np.ndarray: ...

    def figures(self, theta: np.ndarray, loglik: float, sigma0: np.ndarray,
                information: np.ndarray | None) -> tuple[FitIndices, list[Flag]]: ...

    def score_covariance(self, theta: np.ndarray) -> np.ndarray: ...

    def result_fields(self, theta: np.ndarray, mats: Matrices) -> dict[str, Any]: ...


@dataclass(frozen=True)
class Judgement:
    """The convergence verdict, a plain sentence saying why, and the optimiser's own words."""

    converged: bool
    message: str
    optimiser_message: str = ""


def judge(optimiser_ok: bool, message: str, gradient: np.ndarray, sizes: np.ndarray,
          inside: np.ndarray, n_rows: int) -> Judgement:
    """Converged when the optimiser stopped well and the scaled gradient is small (see the
    module docstring); the reason in a plain sentence, the optimiser's message kept."""
    if not optimiser_ok:
        return Judgement(False, stop_sentence(message), message)
    worst = float(np.max(np.abs(gradient * sizes)[inside])) / max(n_rows, 1) if inside.any() else 0.0
    if not np.isfinite(worst) or worst >= GRADIENT_TOLERANCE:
        return Judgement(False, "The estimates did not settle: the slope of the likelihood "
                                "(its gradient) is not close to zero at the final estimate.",
                         message)
    return Judgement(True, stop_sentence(message), message)


def start_vector(objective: Objective, start: Start, monitor: Monitor | None) -> np.ndarray:
    """Start values: the objective's own, or given ones (a previous result or estimates named
    by (kind, from, to); parameters they do not name take the objective's own start)."""
    layout = objective.layout
    if start is None:
        return objective.start(monitor)
    if isinstance(start, np.ndarray):
        if start.shape != (layout.n_free,):
            raise ValueError(f"start has {start.size} values for {layout.n_free} free parameters")
        return start.astype(float)
    named = {p.key: p.estimate for p in start.parameters} if isinstance(start, FitResult) else start
    theta = layout.theta_from(named, default=np.nan)
    if np.isnan(theta).any():
        own = objective.start(monitor)
        theta = np.where(np.isnan(theta), own, theta)
    return theta


def start_scale(start: Start, layout: ParameterLayout, sizes: np.ndarray) -> np.ndarray:
    """The optimiser's scale: with a previous result as the start, each parameter's standard
    error there (a refit on similar data then starts near a well-conditioned optimum, so the
    precise optimiser needs far fewer iterations); otherwise, and where that result has no
    error, the parameter's typical size. Errors are kept within 1e-3..1e3 typical sizes."""
    if not isinstance(start, FitResult):
        return sizes
    se = layout.theta_from({p.key: p.se for p in start.parameters if p.free and p.se},
                           default=np.nan)
    return np.where(np.isfinite(se), np.clip(se, 1e-3 * sizes, 1e3 * sizes), sizes)


def solve(objective: Objective, notes: list[str], monitor: Monitor | None = None, *,
          standard_errors: bool = True, start: Start = None) -> FitResult:
    """Maximise `objective` and build its FitResult (see the module docstring).
    standard_errors=False skips the observed information (and the Newton polish that uses it).
    A numerical failure raises EstimationError naming its likely cause (models.conditioning)."""
    with numerical_failures(objective.item_values, objective.spec):
        return _solve(objective, notes, monitor, standard_errors, start)


def _solve(objective: Objective, notes: list[str], monitor: Monitor | None,
           standard_errors: bool, start: Start) -> FitResult:
    started = time.perf_counter()
    layout, options = objective.layout, objective.options
    flags = list(objective.preflight())
    checkpoint(monitor, 0.02, "Start values")
    theta0 = start_vector(objective, start, scaled(monitor, 0.02, 0.3))
    sizes = layout.sizes(theta0, objective.item_var)
    # Objectives with a cheap information for Newton steps (the window likelihood's expected
    # information): a rough optimum, then Newton steps until they settle (else the precise
    # optimiser finishes and the steps are tried again). Others: the precise optimiser.
    cheap = objective.cheap_steps
    scale = (objective.optimiser_scale(theta0, sizes, monitor) if start is None
             else start_scale(start, layout, sizes))
    theta, ok, message, iterations = maximise(objective, theta0, scale,
                                              options.max_iter, scaled(monitor, 0.3, 0.75),
                                              precise=not cheap)
    steps = 0
    if cheap:
        checkpoint(monitor, 0.75, "Newton steps")
        theta, steps, settled = newton_polish(objective, theta, objective.step_information(theta))
        if not settled and iterations < options.max_iter:
            theta, ok, message, more = maximise(objective, theta, sizes, options.max_iter - iterations,
                                                scaled(monitor, 0.75, 0.8))
            iterations += more
            theta, more_steps, _ = newton_polish(objective, theta, objective.step_information(theta))
            steps += more_steps
    cov = cov_model = np.full((layout.n_free, layout.n_free), np.nan)
    information = None
    if standard_errors:     # the errors belong to the estimate reported
        checkpoint(monitor, 0.8, "Standard errors")
        information = objective.information(theta, sizes, scaled(monitor, 0.8, 0.88))
        if not cheap:
            theta, more_steps, _ = newton_polish(objective, theta, information)
            steps += more_steps
    ll, grad = objective.loglik_and_gradient(theta)
    inside = interior(objective, theta)
    verdict = judge(ok, message, grad, sizes, inside, objective.n_rows)
    if standard_errors:
        cov_model, se_ok = covariance_from_information(information, inside)
        cov = cov_model
        if verdict.converged and not se_ok:
            flags.append(warn.not_identified())
        if options.standard_errors == "robust":
            checkpoint(monitor, 0.88, "Robust standard errors")
            cov = sandwich(cov_model, objective.score_covariance(theta))
    checkpoint(monitor, 0.9, "Fit figures")
    mats = layout.unpack(theta)
    radius = spectral_radius(list(mats.lagged)) if layout.q else 0.0
    latent = (stationary_covariance(list(mats.lagged), mats.psi) if radius < 1.0
              else objective.latent_covariance(theta, mats, radius))
    sigma0 = mats.lam @ latent @ mats.lam.T + np.diag(mats.theta)
    fit, figure_flags = objective.figures(theta, ll, sigma0, information)
    flags += figure_flags + warn.stationarity(radius) + boundary_flags(layout, theta, sigma0,
                                                                        objective.item_var)
    parameters = parameter_table(layout, theta, cov, cov_model, latent, sigma0, mats)
    fields = objective.result_fields(theta, mats)
    checkpoint(monitor, 1.0, "Done")
    return FitResult(
        spec=objective.spec, options=options, estimator=options.estimator,
        converged=verdict.converged, message=verdict.message,
        optimiser_message=verdict.optimiser_message, iterations=iterations,
        seconds=time.perf_counter() - started, n_windows=objective.n_rows,
        n_occasions=objective.n_occasions, parameters=tuple(parameters), fit=fit,
        loadings=mats.lam.copy(), intercepts=mats.nu.copy(), unique=mats.theta.copy(),
        lagged=tuple(mats.lagged[l].copy() for l in range(layout.q)), innovation=mats.psi.copy(),
        latent_cov=latent, r_squared=1.0 - mats.theta / np.diag(sigma0), spectral_radius=radius,
        flags=tuple(flags), notes=tuple(notes), newton_steps=steps,
        covariance=cov if standard_errors else None, se_method=options.standard_errors, **fields)


def boundary_flags(layout: ParameterLayout, theta: np.ndarray, sigma0: np.ndarray,
                   item_var: np.ndarray) -> list[Flag]:
    """Estimates on the boundary: unique variances 0 (Heywood), innovation variances 0,
    partial correlations near +-1."""
    out = []
    for n, e in enumerate(layout.free_entries):
        if e.kind == Kind.UNIQUE and theta[n] <= 1e-6 * sigma0[e.index[0], e.index[0]]:
            out.append(warn.heywood(e.to))
        elif e.kind == Kind.INNOVATION and e.is_variance and theta[n] <= 1e-6 * float(np.mean(item_var)):
            out.append(warn.zero_innovation(e.to))
        elif e.kind == Kind.PARTIAL_CORRELATION and abs(theta[n]) > 0.99:
            out.append(warn.partial_boundary(e.from_, e.to))
    return out


def parameter_table(layout: ParameterLayout, theta: np.ndarray, cov: np.ndarray,
                    cov_model: np.ndarray, latent: np.ndarray, sigma0: np.ndarray,
                    mats: Matrices) -> list[Parameter]:
    """Every parameter with its standard errors (from `cov`, and model-based from
    `cov_model`; free parameters off the boundary only) and its value standardized by the
    stationary standard deviations of states and items."""
    values = layout.values(theta)
    scales = Scales(sd_item=np.sqrt(np.clip(np.diag(sigma0), 1e-300, None)),
                    sd_state=np.sqrt(np.clip(np.diag(latent), 1e-300, None)),
                    item_var=np.diag(sigma0), first_copy=mats.phif)
    standardized = layout.standardized(values, scales)
    se, se_model = _errors(cov), _errors(cov_model)
    out, n = [], 0
    for e, value, std in zip(layout.entries, values, standardized):
        errors = (None, None)
        if e.free:
            errors = (se[n], se_model[n])
            n += 1
        out.append(Parameter(kind=e.kind, from_=e.from_, to=e.to, estimate=float(value),
                             se=errors[0], standardized=float(std), free=e.free, lag=e.lag,
                             se_model=errors[1]))
    return out


def _errors(cov: np.ndarray) -> list[float | None]:
    """Square roots of the diagonal; None where it is not a positive number."""
    variances = np.diag(cov)
    return [float(np.sqrt(v)) if np.isfinite(v) and v > 0 else None for v in variances]
