"""The window pseudo-log-likelihood as a function of the free parameters, with its gradient.

loglik(theta) = sum over window rows of the normal log-density of the observed entries,
with mean and covariance implied by the model (models.implied); gradients by the chain rule
(models.patterns -> models.implied -> models.parameters).
"""

from __future__ import annotations

import numpy as np

from models.implied import Implied, implied_moments, matrix_gradients
from models.parameters import Matrices, ParameterLayout
from models.patterns import PatternData
from models.spec import FitOptions, ModelSpec
from models.start import start_matrices
from models.windows import LagWindows


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

    def loglik_and_gradient(self, theta: np.ndarray) -> tuple[float, np.ndarray]:
        m = self.layout.unpack(theta)
        imp = implied_moments(m, self.depth, self.estimator)
        ll, g_sigma, g_mu = self.data.loglik(imp.mu, imp.sigma, gradient=True)
        g = matrix_gradients(m, imp, g_sigma, g_mu, self.depth, self.estimator)
        return ll, self.layout.gradient_vector(m, g)
