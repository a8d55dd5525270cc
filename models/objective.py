"""The window pseudo-log-likelihood as a function of the free parameters, with its gradient.

loglik(theta) = sum over window rows of the normal log-density of the observed entries,
with mean and covariance implied by the model (models.implied); gradients by the chain rule
(models.patterns -> models.implied -> models.parameters).
"""

from __future__ import annotations

import numpy as np

from lagwise.models.implied import Implied, implied_moments, matrix_gradients
from lagwise.models.parameters import Matrices, ParameterLayout
from lagwise.models.patterns import PatternData
from lagwise.models.spec import FitOptions, ModelSpec
from lagwise.models.start import start_matrices
from lagwise.models.windows import LagWindows


class WindowObjective:
    """Log-likelihood of `windows` under `spec` for the window estimators."""

    def __init__(self, windows: LagWindows, spec: ModelSpec, options: FitOptions):
        self.spec, self.options = spec, options
        self.depth = windows.depth
        self.estimator = options.estimator
        rows = windows.data if options.missing == "fiml" else windows.data[windows.complete]
        self.rows = rows
        self.data = PatternData(rows)
        p = len(spec.items)
        self.item_var = np.nanvar(rows[:, :p], axis=0) if rows.size else np.ones(p)
        self.layout = ParameterLayout(spec, self.item_var, self.estimator)

    @property
    def n_rows(self) -> int:
        return self.data.n_rows

    def start(self) -> np.ndarray:
        return self.layout.pack(start_matrices(self.layout, self.rows, self.depth))

    def matrices(self, theta: np.ndarray) -> Matrices:
        return self.layout.unpack(theta)

    def implied(self, theta: np.ndarray) -> Implied:
        return implied_moments(self.layout.unpack(theta), self.depth, self.estimator)

    def loglik(self, theta: np.ndarray) -> float:
        """Raises models.implied.NotAdmissible outside the admissible region."""
        imp = self.implied(theta)
        return self.data.loglik(imp.mu, imp.sigma, gradient=False)[0]

    def expected_information(self, theta: np.ndarray, scale: np.ndarray) -> np.ndarray:
        """Expected (Fisher) information of the window rows at `theta`, summed over patterns:
        I_ij = sum_g n_g [ 1/2 tr(S^-1 dS_i S^-1 dS_j) + dmu_i' S^-1 dmu_j ] with S = Sigma_oo
        (normal-theory information; the moment derivatives by central differences of the
        implied moments with steps 1e-6 x `scale`)."""
        m = theta.size
        w = self.data.width
        d_sigma = np.empty((m, w, w))
        d_mu = np.empty((m, w))
        for i in range(m):
            step = 1e-6 * max(abs(theta[i]), scale[i])
            e = np.zeros(m)
            e[i] = step
            plus, minus = self.implied(theta + e), self.implied(theta - e)
            d_sigma[i] = (plus.sigma - minus.sigma) / (2 * step)
            d_mu[i] = (plus.mu - minus.mu) / (2 * step)
        imp = self.implied(theta)
        data = self.data
        inv = np.where(data.obs_outer, np.linalg.inv(data.padded(imp.sigma)), 0.0)
        info = np.zeros((m, m))
        for g in range(data.n_patterns):
            a = inv[g] @ d_sigma @ inv[g]                       # (m, w, w)
            info += data.counts[g] * (0.5 * np.einsum("iab,jba->ij", a, d_sigma)
                                      + d_mu @ inv[g] @ d_mu.T)
        return 0.5 * (info + info.T)

    def loglik_and_gradient(self, theta: np.ndarray) -> tuple[float, np.ndarray]:
        m = self.layout.unpack(theta)
        imp = implied_moments(m, self.depth, self.estimator)
        ll, g_sigma, g_mu = self.data.loglik(imp.mu, imp.sigma, gradient=True)
        g = matrix_gradients(m, imp, g_sigma, g_mu, self.depth, self.estimator)
        return ll, self.layout.gradient_vector(m, g)
