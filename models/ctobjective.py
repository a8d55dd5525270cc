"""The `continuous-time` estimator: the exact likelihood of a diary with unequal intervals.

The states follow d eta = A (eta - mu) dt + G dW; between prompts D apart the filter
(models.kalman, one step class per distinct interval) uses B(D) = expm(A D) and
Q(D) = int_0^D expm(A s) W expm(A' s) ds (models.drift), and each segment starts from the
stationary distribution (A S + S A' + W = 0). The measurement part (loadings, intercepts,
unique variances) is the discrete model's, the levels sit in the intercepts. The gradient is
the filter's reverse mode chained through the drift's eigendecomposition (or Van Loan's
exponential) and the Lyapunov equation.
Start values: the stationary window estimate, with A = logm(B) / D and W = -(A S + S A')
at the median interval D. Optimisation, observed-information standard errors and the table
are shared (models.solution); the layout's lag-1 paths and innovations hold B and Q at the
median interval.
"""

from __future__ import annotations

import warnings
from dataclasses import replace
from typing import TYPE_CHECKING, Any, Callable

import numpy as np
from scipy.linalg import logm

from lagwise.models import flags as warn
from lagwise.models.ctresults import ContinuousTime
from lagwise.models.drift import (discrete_adjoint, discrete_system, stationary_adjoint,
                                  stationary_covariance)
from lagwise.models.diary import Diary
from lagwise.models.errors import EstimationError, SpecError
from lagwise.models.exact import window_estimate
from lagwise.models.filterplan import filter_plan
from lagwise.models.fitindices import fit_indices
from lagwise.models.flags import Flag
from lagwise.models.implied import NotAdmissible
from lagwise.models.intervals import DEFAULT_NIGHT, prompt_intervals
from lagwise.models.itemcheck import answered_moments
from lagwise.models.kalman import state_space_gradient, state_space_loglik
from lagwise.models.kinds import Kind
from lagwise.models.lyapunov import solve_lyapunov
from lagwise.models.optimise import ObservedInformation
from lagwise.models.parameters import Gradients, Matrices, ParameterLayout
from lagwise.models.progress import Monitor, checkpoint
from lagwise.models.results import CAUTION_IDIOGRAPHIC, FitIndices
from lagwise.models.spec import ModelSpec

if TYPE_CHECKING:
    from lagwise.models.estimators import FitOptions

CAUTION_CT_SE = ("Standard errors come from the observed information of the continuous-time "
                 "likelihood; with a few hundred prompts they are approximate.")


def _check(spec: ModelSpec) -> None:
    if spec.lags != 1:
        raise SpecError("The continuous-time estimator describes lag-1 dynamics: set the lag "
                        "order to 1.")
    if spec.unique_autocorrelation:
        raise SpecError("The continuous-time estimator does not model autocorrelated unique "
                        "parts: remove them from the model.")
    if not np.diag(spec.path_mask(1)).all():
        raise SpecError("The continuous-time estimator needs every state's inertia free (a "
                        "drift of 0 would never return the state to its level).")


class ContinuousObjective(ObservedInformation):
    """Continuous-time log-likelihood of a diary as a function of the free parameters."""

    def __init__(self, diary: Diary, spec: ModelSpec, options: "FitOptions"):
        _check(spec)
        self.diary, self.spec, self.options = diary, spec, options
        self.n_occasions = diary.n_occasions
        self.values = diary.select(spec.items).values
        self.intervals = prompt_intervals(diary, options.interval_unit, options.night,
                                          options.prompt_spacing)
        self.plan = filter_plan(self.values, self.intervals.segment, self.intervals.step)
        self.n_rows = int((~np.isnan(self.values)).any(axis=1).sum())
        self.item_var = answered_moments(self.values)[1]
        self.layout = ParameterLayout(spec, self.item_var, interval=self.intervals.median)
        self.start_loglik: float | None = None

    @classmethod
    def build(cls, diary: Diary, spec: ModelSpec, options: "FitOptions",
              monitor: Monitor | None = None) -> "ContinuousObjective":
        return cls(diary, spec, options)

    @property
    def item_values(self) -> np.ndarray:
        return self.values

    def answers_per_item(self) -> np.ndarray:
        return (~np.isnan(self.values)).sum(axis=0)

    def _system(self, theta: np.ndarray) -> tuple[Matrices, tuple, np.ndarray]:
        m = self.layout.unpack(theta)
        try:
            s = stationary_covariance(m.drift, m.diffusion)
        except EstimationError:
            raise NotAdmissible("the drift is not stable") from None
        b, q = discrete_system(m.drift, m.diffusion, self.intervals.steps)
        return m, (self.values, self.plan, m.nu, m.lam, m.theta, b, q, s), s

    def loglik(self, theta: np.ndarray) -> float:
        _, args, _ = self._system(theta)
        try:
            return state_space_loglik(*args)
        except (EstimationError, np.linalg.LinAlgError):
            raise NotAdmissible("outside the admissible region") from None

    def loglik_and_gradient(self, theta: np.ndarray) -> tuple[float, np.ndarray]:
        m, args, s = self._system(theta)
        try:
            g = state_space_gradient(*args)
        except (EstimationError, np.linalg.LinAlgError):
            raise NotAdmissible("outside the admissible region") from None
        a_bar, w_bar = discrete_adjoint(m.drift, m.diffusion, self.intervals.steps, g.t, g.q)
        a_start, w_start = stationary_adjoint(m.drift, s, g.p0)
        zero = np.zeros_like(m.lagged)
        grads = Gradients(nu=g.intercepts, lam=g.z, theta=g.h, d=np.zeros_like(m.d), lagged=zero,
                          psi=zero[0], drift=a_bar + a_start, diffusion=w_bar + w_start)
        return g.loglik, self.layout.gradient_vector(m, grads)

    # ----- what models.solution asks ----------------------------------------------------
    def start(self, monitor: Monitor | None = None) -> np.ndarray:
        """The stationary window estimate turned into drift and diffusion (module docstring)."""
        checkpoint(monitor, 0.0, "Window estimate for start values")
        named, self.start_loglik = window_estimate(self.diary, self.spec,
                                                   self.options.for_estimator("stationary"),
                                                   monitor)
        return self.layout.theta_from(continuous_start(named, self.spec, self.intervals.median),
                                      default=0.0)

    def optimiser_scale(self, theta0: np.ndarray, sizes: np.ndarray,
                        monitor: Monitor | None = None) -> np.ndarray:
        """1 / sqrt of the observed information's diagonal at the start (the typical sizes
        where it is not positive), kept within 1e-3..1e3 sizes: drift and diffusion trade off
        strongly, and L-BFGS-B on the typical sizes alone needs several times the iterations.
        The diagonal is estimated from SCALE_PROBES gradients (`probed_diagonal`), not one
        per parameter: a rough scale serves the optimiser as well as the exact one."""
        checkpoint(monitor, 0.0, "Scale of the parameters")
        steps = 1e-6 * np.maximum(np.abs(theta0), sizes)
        diagonal = -probed_diagonal(lambda x: self.loglik_and_gradient(x)[1], theta0, steps)
        scale = np.where(diagonal > 0, 1.0 / np.sqrt(np.abs(diagonal)), sizes)
        return np.clip(scale, 1e-3 * sizes, 1e3 * sizes)

    def score_covariance(self, theta: np.ndarray) -> np.ndarray:
        raise EstimationError("The continuous-time estimator's errors come from its likelihood.")

    def latent_covariance(self, theta: np.ndarray, mats: Matrices, radius: float) -> np.ndarray:
        raise EstimationError("The drift matrix is not stable.")

    def figures(self, theta: np.ndarray, loglik: float, sigma0: np.ndarray,
                information: np.ndarray | None) -> tuple[FitIndices, list[Flag]]:
        """The exact log-likelihood, AIC and BIC (n = answered prompts), and the drift's
        stability."""
        ix = fit_indices(loglik, None, 0.0, self.layout.n_free, 0, self.n_rows, None, sigma0)
        largest = float(np.max(np.linalg.eigvals(self.layout.unpack(theta).drift).real))
        return replace(ix, df=0, exact=True), warn.drift_stability(largest)

    def result_fields(self, theta: np.ndarray, mats: Matrices) -> dict[str, Any]:
        iv = self.intervals
        return {"continuous": ContinuousTime(unit=iv.unit, night=self.options.night or DEFAULT_NIGHT,
                                             median_interval=iv.median,
                                             shortest=float(iv.steps[0]),
                                             longest=float(iv.steps[-1])),
                "start_loglik_windows": self.start_loglik,
                "cautions": (CAUTION_IDIOGRAPHIC, CAUTION_CT_SE)}


SCALE_PROBES = 8


def probed_diagonal(gradient: Callable[[np.ndarray], np.ndarray], theta: np.ndarray,
                    steps: np.ndarray, probes: int = SCALE_PROBES) -> np.ndarray:
    """The diagonal of the Hessian H at theta, estimated from forward differences of the
    gradient along `probes` random directions steps o r (r of independent +-1, fixed seed):
    H_ii ~ mean over r of r_i (H (steps o r))_i / steps_i, unbiased and exact when H is
    diagonal (Bekas, Kokiopoulou and Saad 2007, "An estimator for the diagonal of a matrix",
    Applied Numerical Mathematics 57:1214-1229). A probe that leaves the admissible region
    is taken backwards."""
    rng = np.random.default_rng(0)
    g0 = gradient(theta)
    total = np.zeros_like(theta)
    for _ in range(probes):
        r = rng.choice([-1.0, 1.0], size=theta.size)
        try:
            total += r * (gradient(theta + steps * r) - g0)
        except (NotAdmissible, np.linalg.LinAlgError):
            total += r * (g0 - gradient(theta - steps * r))
    return total / (probes * steps)


def _real_log(b: np.ndarray) -> np.ndarray | None:
    """logm(B) when it is real and accurate: every eigenvalue inside the unit circle, away
    from 0 and off the negative real axis (where no real logarithm exists); else None."""
    if not np.all(np.isfinite(b)):
        return None
    lam = np.linalg.eigvals(b)
    on_negative_axis = (np.abs(lam.imag) <= 1e-12 * np.maximum(np.abs(lam), 1.0)) & (lam.real <= 0)
    if not np.all((np.abs(lam) < 1) & (np.abs(lam) > 1e-6) & ~on_negative_axis):
        return None
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)    # "may be inaccurate": not used
        try:
            a = np.real_if_close(logm(b))
        except (RuntimeWarning, ValueError, np.linalg.LinAlgError):
            return None
    return None if np.iscomplexobj(a) or not np.all(np.isfinite(a)) else a


def continuous_start(named: dict, spec: ModelSpec, interval: float) -> dict:
    """Drift and diffusion named by (kind, from, to) from a discrete lag-1 estimate over
    `interval`: A = logm(B) / interval when that is real and stable (else the diagonal
    log(B_ii) / interval, inertia kept in 0.05..0.95), W = -(A S + S A') with S the discrete
    stationary covariance; fixed drift entries stay 0."""
    states = spec.state_names
    k = len(states)
    b, psi = np.zeros((k, k)), np.zeros((k, k))
    for i, to in enumerate(states):
        for j, fr in enumerate(states):
            b[i, j] = named.get((str(Kind.INERTIA if i == j else Kind.CROSS_LAGGED), fr, to), 0.0)
            if j <= i:
                psi[i, j] = psi[j, i] = named.get((str(Kind.INNOVATION), fr, to), 1.0 if i == j else 0.0)
    mask = spec.path_mask(1)
    a = _real_log(b)
    a = None if a is None else a / interval
    if a is None or np.max(np.linalg.eigvals(a * mask).real) >= 0:
        a = np.diag(np.log(np.clip(np.diag(b), 0.05, 0.95))) / interval
    a = a * mask
    s = solve_lyapunov(b, psi) if np.max(np.abs(np.linalg.eigvals(b))) < 1 else psi
    w = -(a @ s + s @ a.T)
    if np.min(np.linalg.eigvalsh(w)) <= 0:
        w = np.diag(np.maximum(np.abs(np.diag(w)), 1e-3))
    out = dict(named)
    for i, to in enumerate(states):
        for j, fr in enumerate(states):
            out[(str(Kind.DRIFT), fr, to)] = float(a[i, j])
            if j <= i:
                out[(str(Kind.DIFFUSION), fr, to)] = float(w[i, j])
    return out
