"""The window pseudo-log-likelihood as a function of the free parameters, with its gradient,
and what the window estimators add to a result (fit indices on the window covariance).

loglik(theta) = sum over window rows of the normal log-density of the observed entries,
with mean and covariance implied by the model (models.implied); gradients by the chain rule
(models.patterns -> models.implied -> models.parameters). The stationary and the
first-copy-free estimators differ only in the covariance of the oldest copies
(`Estimator.free_first_copies`).
"""

from __future__ import annotations

from dataclasses import replace
from typing import TYPE_CHECKING, Any

import numpy as np

from lagwise.models import flags as warn
from lagwise.models.itemcheck import answered_moments
from lagwise.models.errors import EstimationError, SpecError
from lagwise.models.fitindices import fit_indices, scaled_fit
from lagwise.models.flags import Flag
from lagwise.models.implied import Implied, implied_moments, matrix_gradients, moment_jacobian
from lagwise.models.optimise import observed_information
from lagwise.models.parameters import Matrices, ParameterLayout
from lagwise.models.patterns import pattern_data
from lagwise.models.progress import Monitor, checkpoint
from lagwise.models.robust import (Projection, WindowScores, baseline_information,
                                   baseline_projection, fit_test_traces, kernel_covariance,
                                   project)
from lagwise.models.results import (CAUTION_IDIOGRAPHIC, CAUTION_PSEUDO, CAUTION_ROBUST_SE,
                                     CAUTION_SE, FitIndices)
from lagwise.models.spec import ModelSpec
from lagwise.models.start import start_matrices
from lagwise.models.windows import LagWindows, lag_windows

if TYPE_CHECKING:
    from lagwise.models.diary import Diary
    from lagwise.models.estimators import FitOptions

MIN_WINDOWS_PER_PARAMETER = 5.0
MIN_CLUSTERS = 20   # fewer independent segments: the scores' covariance by a kernel (models.robust)


class WindowObjective:
    """Log-likelihood of `windows` under `spec` for the window estimators."""

    def __init__(self, windows: LagWindows, spec: ModelSpec, options: "FitOptions"):
        self.spec, self.options = spec, options
        self.depth = windows.depth
        self.free_first_copies = options.method.free_first_copies
        self.n_occasions = windows.n_occasions
        keep = slice(None) if options.missing == "fiml" else windows.complete
        rows = windows.data[keep]
        self.rows = rows
        self.data = pattern_data(rows)
        # the dependence between windows: segments (clusters) or, with days joined, time order
        segment = (np.arange(windows.n_windows) if windows.segment is None else windows.segment)
        self.segment = np.asarray(segment)[keep][self.data.kept]
        # clusters need many independent segments; with days joined or few segments, a kernel
        self.joined = windows.days_joined or np.unique(self.segment).size < MIN_CLUSTERS
        self.order = np.argsort(np.asarray(windows.occasion)[keep][self.data.kept], kind="stable")
        p = len(spec.items)
        self.item_var = answered_moments(rows[:, :p])[1] if rows.size else np.ones(p)
        self.layout = ParameterLayout(spec, self.item_var, self.free_first_copies)
        self._jacobian: tuple[bytes, Implied, Projection] | None = None
        self._scores: tuple[bytes, WindowScores, np.ndarray | None] | None = None

    @classmethod
    def build(cls, diary: "Diary", spec: ModelSpec, options: "FitOptions",
              monitor: Monitor | None = None) -> "WindowObjective":
        checkpoint(monitor, 0.0, "Building lag windows")
        return cls(lag_windows(diary.select(spec.items), options.window_depth(spec)), spec, options)

    @property
    def n_rows(self) -> int:
        return self.data.n_rows

    @property
    def item_values(self) -> np.ndarray:
        """The newest prompt of each window row (items as columns)."""
        return self.rows[:, :len(self.spec.items)]

    def answers_per_item(self) -> np.ndarray:
        """How often the likelihood counts an answer of each item (over all window copies)."""
        per_column = self.data.counts @ self.data.observed
        return per_column.reshape(self.depth + 1, -1).sum(axis=0)

    # ----- the likelihood ---------------------------------------------------------------
    def matrices(self, theta: np.ndarray) -> Matrices:
        return self.layout.unpack(theta)

    def implied(self, theta: np.ndarray) -> Implied:
        return implied_moments(self.layout.unpack(theta), self.depth, self.free_first_copies)

    def loglik(self, theta: np.ndarray) -> float:
        """Raises models.implied.NotAdmissible outside the admissible region."""
        imp = self.implied(theta)
        return self.data.loglik(imp.mu, imp.sigma, gradient=False)[0]

    def loglik_and_gradient(self, theta: np.ndarray) -> tuple[float, np.ndarray]:
        m = self.layout.unpack(theta)
        imp = implied_moments(m, self.depth, self.free_first_copies)
        ll, g_sigma, g_mu = self.data.loglik(imp.mu, imp.sigma, gradient=True)
        g = matrix_gradients(m, imp, g_sigma, g_mu, self.depth, self.free_first_copies)
        return ll, self.layout.gradient_vector(m, g)

    def expected_information(self, theta: np.ndarray) -> np.ndarray:
        """Expected (Fisher) information of the window rows at `theta`, summed over patterns:
        I_ij = sum_g n_g [ 1/2 tr(S^-1 dS_i S^-1 dS_j) + dmu_i' S^-1 dmu_j ] with S = Sigma_oo
        (normal-theory information; the moment derivatives analytic, models.implied.moment_jacobian)."""
        imp, model = self.jacobian(theta)
        d_mu, d_sigma = model.mu, model.sigma
        data = self.data
        if data.complete:
            inverses = np.linalg.inv(imp.sigma)[None]
        else:
            inverses = np.where(data.obs_outer, np.linalg.inv(data.padded(imp.sigma)), 0.0)
        n = theta.size
        flat = d_sigma.reshape(n, -1)
        info = np.zeros((n, n))
        for count, inv in zip(data.counts, inverses):
            y = (inv @ d_sigma @ inv).reshape(n, -1)
            info += count * (0.5 * y @ flat.T + d_mu @ inv @ d_mu.T)
        return 0.5 * (info + info.T)

    cheap_steps = True   # the expected information is analytic: Newton steps finish the optimum

    def step_information(self, theta: np.ndarray) -> np.ndarray:
        """The information for Newton steps: the expected information (any missingness)."""
        return self.expected_information(theta)

    def information(self, theta: np.ndarray, sizes: np.ndarray,
                    monitor: Monitor | None = None) -> np.ndarray:
        """The information for standard errors and Newton steps: the expected information
        when every window is complete (then it is the usual choice for normal ML), else the
        observed information (the recommended one under missingness at random)."""
        if self.data.complete:
            return self.expected_information(theta)
        return observed_information(self, theta, sizes, monitor)

    # ----- what models.solution asks ----------------------------------------------------
    def start(self, monitor: Monitor | None = None) -> np.ndarray:
        return self.layout.pack(start_matrices(self.layout, self.rows, self.depth))

    def optimiser_scale(self, theta0: np.ndarray, sizes: np.ndarray,
                        monitor: Monitor | None = None) -> np.ndarray:
        return sizes

    def preflight(self) -> list[Flag]:
        """Refuse what cannot be estimated; warn when the windows are few."""
        n, n_free, width = self.n_rows, self.layout.n_free, self.data.width
        complete = int(self.data.counts[self.data.observed.all(axis=1)].sum())
        if complete <= width:   # fewer: the data's window covariance is singular
            raise EstimationError(
                f"Too few complete lag windows ({complete}) for {len(self.spec.items)} items in "
                f"windows of {self.depth + 1} prompts: need at least {width + 1} (check the time "
                "settings and missed prompts, or use fewer items).")
        moments = width * (width + 3) // 2
        if n_free > moments:
            raise SpecError(f"The model has {n_free} free parameters but the lag windows give only "
                            f"{moments} moments: free fewer paths or use fewer states.")
        if n < MIN_WINDOWS_PER_PARAMETER * n_free:
            return [warn.few_windows(n, n_free, MIN_WINDOWS_PER_PARAMETER)]
        return []

    def latent_covariance(self, theta: np.ndarray, mats: Matrices, radius: float) -> np.ndarray:
        """Without a stationary solution: the implied covariance of the newest copy."""
        return self.implied(theta).phi_xi[:self.layout.k, :self.layout.k]

    def jacobian(self, theta: np.ndarray) -> tuple[Implied, Projection]:
        """The implied moments and their Jacobian at `theta` (the last one is kept)."""
        key = theta.tobytes()
        if self._jacobian is None or self._jacobian[0] != key:
            m = self.layout.unpack(theta)
            imp = implied_moments(m, self.depth, self.free_first_copies)
            d_mu, d_sigma = moment_jacobian(m, self.layout.directions(m), imp, self.depth,
                                            self.free_first_copies)
            self._jacobian = (key, imp, Projection(d_mu, d_sigma))
        return self._jacobian[1], self._jacobian[2]

    def scores(self, theta: np.ndarray) -> tuple[WindowScores, np.ndarray | None]:
        """The window scores at the implied moments of `theta`, and (segments as clusters)
        their sums by segment mapped to the parameters (the last ones are kept)."""
        key = theta.tobytes()
        if self._scores is None or self._scores[0] != key:
            imp, model = self.jacobian(theta)
            scores = WindowScores.at(self.data, imp.mu, imp.sigma)
            summed = None if self.joined else project(*scores.cluster_sums(self.segment), model)
            self._scores = (key, scores, summed)
        return self._scores[1], self._scores[2]

    def score_covariance(self, theta: np.ndarray) -> np.ndarray:
        """J of models.robust: the covariance of the total window score, windows dependent
        within a segment."""
        scores, summed = self.scores(theta)
        if summed is not None:
            return summed.T @ summed
        return kernel_covariance(scores.rows(self.jacobian(theta)[1]), self.segment, self.order)

    def figures(self, theta: np.ndarray, loglik: float, sigma0: np.ndarray,
                information: np.ndarray | None) -> tuple[FitIndices, list[Flag]]:
        """Fit indices on the window covariance against the saturated and independence models,
        and the calibrated test of models.robust. Without the information (a refit):
        the log-likelihood, AIC and BIC only (the saturated model is not needed)."""
        if information is None:
            return fit_indices(loglik, None, 0.0, self.layout.n_free, self.data.width,
                               self.n_rows, None, sigma0), []
        mu_sat, sigma_sat, ll_sat, sat_ok = self.data.saturated_model
        ll_base = self.data.independence_loglik()
        imp, model = self.jacobian(theta)
        fit = fit_indices(loglik, ll_sat, ll_base, self.layout.n_free, self.data.width,
                          self.n_rows, sigma_sat, imp.sigma)
        if fit.df > 0:
            w = self.data.width
            scores, summed = self.scores(theta)
            own = information if self.data.complete else None   # K = D' H_s D
            traces = fit_test_traces(
                scores, imp.sigma, self.segment, self.joined, self.order,
                [(model, own, summed),
                 (baseline_projection(w), baseline_information(self.data, imp.sigma), None)])
            fit = replace(fit, scaled=scaled_fit(fit, w, 2.0 * (ll_sat - ll_base), traces))
        return fit, ([] if sat_ok else [warn.saturated_not_converged()])

    def result_fields(self, theta: np.ndarray, mats: Matrices) -> dict[str, Any]:
        robust = self.options.standard_errors == "robust"
        return {"depth": self.depth,
                "cautions": (CAUTION_IDIOGRAPHIC, CAUTION_PSEUDO,
                             CAUTION_ROBUST_SE if robust else CAUTION_SE)}
