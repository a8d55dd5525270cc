"""A two-state, six-item lag-1 model of our own with known parameters, simulated by several
test modules (never a check value itself: tests compare estimates with these true values or
with each other)."""

from __future__ import annotations

import numpy as np

from lagwise.models.spec import make_spec

SPEC = make_spec({"calm": ["c1", "c2", "c3"], "drive": ["d1", "d2", "d3"]}, lags=1)
TRUE = dict(
    loadings=np.array([[1, 0], [0.8, 0], [1.2, 0], [0, 1], [0, 0.9], [0, 0.7]], float),
    intercepts=np.array([3.0, 2.5, 3.2, 4.0, 3.1, 2.0]),
    unique=np.array([0.5, 0.6, 0.4, 0.5, 0.5, 0.7]),
    lagged=[np.array([[0.45, 0.15], [-0.2, 0.3]])],
    innovation=np.array([[1.0, 0.3], [0.3, 0.8]]),
)
