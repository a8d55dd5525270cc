"""The `exact` estimator: maximum likelihood of the whole series by the Kalman filter.

The dynamic factor model (models.spec) as a linear Gaussian state-space model (models.kalman): every
answered prompt is used, missed prompts are handled by the filter, and each segment restarts
from the stationary distribution (or, with `FitOptions.night_gap`, the days are joined with
that many missed prompts in between, so the states carry over the night). Start values come
from the stationary window estimate (its optimum only); optimisation, standard errors
(observed information), convergence and the parameter table are shared with the window
estimators (models.solution).
Log-likelihood, AIC and BIC are those of the series (BIC with n = answered occasions), so they
compare models properly. The filter plan (models.kalman.filter_plan) is built once per fit.
"""

from __future__ import annotations

from dataclasses import replace
from typing import TYPE_CHECKING, Any

import numpy as np

from lagwise.models.itemcheck import answered_moments
from lagwise.models.diary import Diary
from lagwise.models.errors import EstimationError
from lagwise.models.fitindices import fit_indices
from lagwise.models.flags import Flag
from lagwise.models.implied import NotAdmissible
from lagwise.models.kalman import filter_plan, kalman_gradient, kalman_loglik, kalman_smooth
from lagwise.models.objective import WindowObjective
from lagwise.models.optimise import ObservedInformation, maximise
from lagwise.models.parameters import Gradients, Matrices, ParameterLayout
from lagwise.models.progress import Monitor, checkpoint
from lagwise.models.results import CAUTION_IDIOGRAPHIC, FitIndices, StateScores
from lagwise.models.spec import ModelSpec
from lagwise.models.windows import lag_windows

if TYPE_CHECKING:
    from lagwise.models.estimators import FitOptions

CAUTION_EXACT_SE = ("Standard errors come from the observed information of the exact likelihood; "
                    "with a few hundred prompts they are approximate.")


class ExactObjective(ObservedInformation):
    """Kalman-filter log-likelihood of a diary as a function of the free parameters."""

    def __init__(self, diary: Diary, spec: ModelSpec, options: "FitOptions"):
        self.diary, self.spec, self.options = diary, spec, options
        self.n_occasions = diary.n_occasions
        data = diary.select(spec.items)
        values, segment = data.values, np.asarray(data.segment)
        if options.night_gap is not None:
            values, segment = _join_days(values, segment, int(options.night_gap))
        self.values, self.segment = values, segment
        self.plan = filter_plan(values, segment)
        self.n_rows = int((~np.isnan(values)).any(axis=1).sum())
        self.item_var = answered_moments(values)[1]
        self.layout = ParameterLayout(spec, self.item_var)
        self.autocorrelated = np.array([it in spec.unique_autocorrelation for it in spec.items])
        self.start_loglik: float | None = None

    @classmethod
    def build(cls, diary: Diary, spec: ModelSpec, options: "FitOptions",
              monitor: Monitor | None = None) -> "ExactObjective":
        return cls(diary, spec, options)

    def matrices(self, theta: np.ndarray) -> Matrices:
        return self.layout.unpack(theta)

    @property
    def item_values(self) -> np.ndarray:
        """The answers, prompts as rows (with the nights' blank prompts when days are joined)."""
        return self.values

    def answers_per_item(self) -> np.ndarray:
        """How often the likelihood counts an answer of each item."""
        return (~np.isnan(self.values)).sum(axis=0)

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

    # ----- what models.solution asks ----------------------------------------------------
    def start(self, monitor: Monitor | None = None) -> np.ndarray:
        """The stationary window estimate (see `window_estimate`)."""
        checkpoint(monitor, 0.0, "Window estimate for start values")
        named, self.start_loglik = window_estimate(self.diary, self.spec, self.options, monitor)
        return self.layout.theta_from(named)

    def optimiser_scale(self, theta0: np.ndarray, sizes: np.ndarray,
                        monitor: Monitor | None = None) -> np.ndarray:
        return sizes

    def score_covariance(self, theta: np.ndarray) -> np.ndarray:
        raise EstimationError("The exact estimator's errors come from its exact likelihood.")

    def latent_covariance(self, theta: np.ndarray, mats: Matrices, radius: float) -> np.ndarray:
        raise EstimationError(f"The lagged paths are not stationary (spectral radius {radius:.3f}).")

    def figures(self, theta: np.ndarray, loglik: float, sigma0: np.ndarray,
                information: np.ndarray | None) -> tuple[FitIndices, list[Flag]]:
        """The exact log-likelihood, AIC and BIC (n = answered prompts); no window figures."""
        ix = fit_indices(loglik, None, 0.0, self.layout.n_free, 0, self.n_rows, None, sigma0)
        return replace(ix, df=0, exact=True), []

    def result_fields(self, theta: np.ndarray, mats: Matrices) -> dict[str, Any]:
        states = kalman_smooth(self.values, self.segment, mats.nu, mats.lam, mats.theta,
                               list(mats.lagged), mats.psi, mats.d, plan=self.plan)
        keep = _original_rows(self.diary, self.options)

        def sd(cov: np.ndarray) -> np.ndarray:
            return np.sqrt(np.clip(np.diagonal(cov, axis1=1, axis2=2)[keep], 0, None))

        scores = StateScores(filtered=states.filtered_mean[keep], filtered_sd=sd(states.filtered_cov),
                             smoothed=states.smoothed_mean[keep], smoothed_sd=sd(states.smoothed_cov))
        return {"state_scores": scores, "start_loglik_windows": self.start_loglik,
                "cautions": (CAUTION_IDIOGRAPHIC, CAUTION_EXACT_SE)}


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


def window_estimate(diary: Diary, spec: ModelSpec, options: "FitOptions",
                    monitor: Monitor | None) -> tuple[dict, float]:
    """Start values: the stationary window estimate named by (kind, from, to) (the optimum
    only: its standard errors and fit statistics are not needed here), and its window
    pseudo-log-likelihood."""
    window_options = options.for_estimator("stationary")
    windows = lag_windows(diary.select(spec.items), window_options.window_depth(spec))
    start = WindowObjective(windows, spec, window_options)
    if start.n_rows < 2:
        raise EstimationError("Too few usable lag windows for start values "
                              f"({start.n_rows}; check the time settings and missing prompts).")
    theta0 = start.start()
    theta, _, _, _ = maximise(start, theta0, start.layout.sizes(theta0, start.item_var),
                              options.max_iter, monitor)
    named = {e.key: v for e, v in zip(start.layout.free_entries, theta)}
    return named, start.loglik(theta)


def _original_rows(diary: Diary, options: "FitOptions") -> np.ndarray:
    """Positions of the diary's occasions in the (possibly night-padded) filtered series."""
    n = diary.n_occasions
    if options.night_gap is None:
        return np.arange(n)
    seg = np.asarray(diary.segment)
    breaks = np.cumsum(np.r_[0, seg[1:] != seg[:-1]])
    return np.arange(n) + breaks * int(options.night_gap)
