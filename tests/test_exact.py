"""The exact (Kalman filter) estimator: checks against the window estimator and the dense
likelihood. The filter itself is checked against statsmodels and the dense normal density in
tests/test_kalman.py."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import multivariate_normal

from models.estimate import fit
from models.exact import ExactObjective, _join_days
from models.simulate import simulate_diary
from models.spec import FitOptions, make_spec

SPEC = make_spec({"calm": ["c1", "c2", "c3"], "drive": ["d1", "d2", "d3"]}, lags=1)
TRUE = dict(
    loadings=np.array([[1, 0], [0.8, 0], [1.2, 0], [0, 1], [0, 0.9], [0, 0.7]], float),
    intercepts=np.array([3.0, 2.5, 3.2, 4.0, 3.1, 2.0]),
    unique=np.array([0.5, 0.6, 0.4, 0.5, 0.5, 0.7]),
    lagged=[np.array([[0.45, 0.15], [-0.2, 0.3]])],
    innovation=np.array([[1.0, 0.3], [0.3, 0.8]]),
)


def test_exact_and_window_estimates_agree_on_long_complete_series():
    # Both estimators are consistent for the same stationary model (DESIGN.md section 2):
    # on a long complete diary their estimates differ by much less than the true effects.
    diary = simulate_diary(SPEC, days=150, prompts_per_day=10, seed=3, **TRUE)
    window = fit(diary, SPEC)
    exact = fit(diary, SPEC, FitOptions(estimator="exact"))
    assert exact.converged and exact.fit.exact and exact.fit.chi2 is None
    np.testing.assert_allclose(exact.lagged[0], window.lagged[0], atol=0.03)
    np.testing.assert_allclose(exact.loadings, window.loadings, atol=0.03)
    np.testing.assert_allclose(exact.lagged[0], TRUE["lagged"][0], atol=0.08)
    # the exact maximum is at least the exact likelihood at the window estimate
    objective = ExactObjective(diary, SPEC, FitOptions(estimator="exact"))
    start = {(p.kind, p.from_, p.to): p.estimate for p in window.parameters}
    theta_w = np.array([start[(e.kind, e.from_, e.to)] for e in objective.layout.free_entries])
    assert exact.fit.loglik >= objective.loglik(theta_w) - 1e-6
    assert exact.fit.bic == pytest.approx(-2 * exact.fit.loglik + exact.fit.n_free * np.log(exact.fit.n_obs))


def test_night_gap_joins_days_with_missed_prompts():
    values = np.arange(12.0).reshape(6, 2)
    segment = np.array([0, 0, 0, 1, 1, 2])
    joined, seg = _join_days(values, segment, 2)
    assert joined.shape == (10, 2) and np.all(seg == 0)
    assert np.isnan(joined[3:5]).all() and np.isnan(joined[7:9]).all()
    np.testing.assert_array_equal(joined[[0, 1, 2, 5, 6, 9]], values)


def test_exact_loglik_equals_dense_density_of_each_day():
    # Days restart from the stationary distribution, so the exact likelihood is the sum over
    # days of the normal log-density with the block-Toeplitz covariance (common practice).
    diary = simulate_diary(SPEC, days=4, prompts_per_day=4, p_missed=0.2, seed=8, **TRUE)
    objective = ExactObjective(diary, SPEC, FitOptions(estimator="exact"))
    from models.parameters import Matrices
    m = Matrices(nu=TRUE["intercepts"], lam=TRUE["loadings"], theta=TRUE["unique"], d=np.zeros(6),
                 lagged=np.array(TRUE["lagged"]), psi=TRUE["innovation"])
    theta = objective.layout.pack(m)
    from models.lyapunov import stationary_covariance
    phi = [stationary_covariance(TRUE["lagged"], TRUE["innovation"])]
    for _ in range(3):
        phi.append(TRUE["lagged"][0] @ phi[-1])
    lam = TRUE["loadings"]
    total = 0.0
    for d in range(4):
        y = diary.values[diary.segment == d]
        big = np.zeros((24, 24))
        for a in range(4):
            for b in range(4):
                h = a - b
                blk = lam @ (phi[h] if h >= 0 else phi[-h].T) @ lam.T + (np.diag(TRUE["unique"]) if h == 0 else 0)
                big[a * 6:(a + 1) * 6, b * 6:(b + 1) * 6] = blk
        vec = y.reshape(-1)
        obs = ~np.isnan(vec)
        if obs.any():
            total += multivariate_normal.logpdf(vec[obs], np.tile(TRUE["intercepts"], 4)[obs], big[np.ix_(obs, obs)])
    assert objective.loglik(theta) == pytest.approx(total, rel=1e-10)
