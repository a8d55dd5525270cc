"""Checks of the diary simulator and the stationary state covariance.

Sources: scipy.linalg.solve_discrete_lyapunov (independent solver); the Yule-Walker
equations of a VAR(2) and the factor-model autocovariances
Sigma_0 = Lambda Phi_0 Lambda' + Theta, Sigma_h = Lambda Phi_h Lambda' (+ d^h Theta for an
autocorrelated unique part) (standard formulas, common practice); Monte Carlo error from
batch means of the simulated series itself.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.linalg import solve_discrete_lyapunov

from lagwise.models.errors import EstimationError
from lagwise.models.lyapunov import companion_covariance
from lagwise.models.lyapunov import stationary_covariance
from lagwise.models.simulate import simulate_diary
from lagwise.models.spec import make_spec

LAM = np.array([[1.0, 0.0], [0.8, 0.0], [0.0, 1.0], [0.0, 1.2]])
NU = np.array([1.0, -2.0, 0.5, 3.0])
THETA = np.array([0.5, 0.4, 0.6, 0.3])
PSI = np.array([[1.0, 0.3], [0.3, 0.8]])
B1 = np.array([[0.5, -0.2], [0.15, 0.35]])
B2 = np.array([[0.15, 0.0], [-0.1, 0.1]])
SPEC1 = make_spec({"a": ["y1", "y2"], "b": ["y3", "y4"]}, lags=1)
SPEC2 = make_spec({"a": ["y1", "y2"], "b": ["y3", "y4"]}, lags=2)


def _lag_cov(y: np.ndarray, h: int) -> np.ndarray:
    """Sample Cov(y_t, y_{t-h}) of one complete segment (deviations from the sample mean)."""
    z = y - y.mean(axis=0)
    return z[h:].T @ z[: len(z) - h] / (len(z) - h)


def _check_autocovariances(y: np.ndarray, expected: list[np.ndarray], batches: int = 40) -> None:
    """Each sample autocovariance within 5 batch-means standard errors of its expected value."""
    for h, target in enumerate(expected):
        whole = _lag_cov(y, h)
        parts = np.array([_lag_cov(chunk, h) for chunk in np.array_split(y, batches)])
        se = parts.std(axis=0, ddof=1) / np.sqrt(batches)
        assert np.all(np.abs(whole - target) < 5 * se + 1e-12), (h, whole, target, se)


def test_stationary_covariance_lag1_equals_scipy_lyapunov():
    # scipy.linalg.solve_discrete_lyapunov solves Phi = B Phi B' + Psi (independent solver).
    assert np.allclose(stationary_covariance([B1], PSI), solve_discrete_lyapunov(B1, PSI))


def test_stationary_covariance_lag2_satisfies_yule_walker():
    # Yule-Walker for a VAR(2) (standard formulas, common practice), Phi_h = Cov(eta_t, eta_{t-h}):
    # Phi_1 = B1 Phi_0 + B2 Phi_1', Phi_0 = B1 Phi_0 B1' + B2 Phi_0 B2' + B1 Phi_1 B2' + B2 Phi_1' B1' + Psi.
    full = companion_covariance([B1, B2], PSI)
    phi0, phi1 = full[:2, :2], full[:2, 2:]
    assert np.allclose(stationary_covariance([B1, B2], PSI), phi0)
    assert np.allclose(full[2:, 2:], phi0)
    assert np.allclose(phi1, B1 @ phi0 + B2 @ phi1.T)
    assert np.allclose(phi0, B1 @ phi0 @ B1.T + B2 @ phi0 @ B2.T + B1 @ phi1 @ B2.T
                       + B2 @ phi1.T @ B1.T + PSI)
    assert np.all(np.linalg.eigvalsh(phi0) > 0)


def test_nonstationary_paths_are_refused():
    with pytest.raises(EstimationError, match="not stationary"):
        stationary_covariance([np.array([[1.05, 0.0], [0.0, 0.2]])], PSI)
    with pytest.raises(EstimationError, match="not stationary"):
        stationary_covariance([np.eye(2) * 0.6, np.eye(2) * 0.5], PSI)  # 0.6 + 0.5 > 1


def test_long_series_lag1_autocovariances_match_factor_formula():
    # Sigma_0 = Lambda Phi_0 Lambda' + Theta, Sigma_1 = Lambda B1 Phi_0 Lambda' (common practice).
    d = simulate_diary(SPEC1, loadings=LAM, intercepts=NU, unique=THETA, lagged=[B1],
                       innovation=PSI, days=1, prompts_per_day=60_000, seed=11)
    phi0 = stationary_covariance([B1], PSI)
    phi1 = B1 @ phi0
    assert np.allclose(d.values.mean(axis=0), NU, atol=0.05)
    _check_autocovariances(d.values, [LAM @ phi0 @ LAM.T + np.diag(THETA), LAM @ phi1 @ LAM.T])


def test_long_series_lag2_with_unique_autocorrelation():
    # Lag 2: Phi_1 from the companion form; an autocorrelated unique part adds d Theta at lag 1.
    dvec = {"y1": 0.4, "y4": -0.3}
    d = simulate_diary(SPEC2, loadings=LAM, intercepts=NU, unique=THETA, lagged=[B1, B2],
                       innovation=PSI, days=1, prompts_per_day=60_000, seed=12,
                       unique_autocorrelation=dvec)
    full = companion_covariance([B1, B2], PSI)
    phi0, phi1 = full[:2, :2], full[:2, 2:]
    dd = np.array([0.4, 0.0, 0.0, -0.3])
    _check_autocovariances(d.values, [LAM @ phi0 @ LAM.T + np.diag(THETA),
                                      LAM @ phi1 @ LAM.T + np.diag(dd * THETA)])


def test_every_day_starts_from_the_stationary_distribution():
    # The first prompt of a day has covariance Sigma_0 (it would be Theta + Lambda Psi Lambda'
    # if the state started at zero); many short days give a precise check.
    d = simulate_diary(SPEC2, loadings=LAM, intercepts=NU, unique=THETA, lagged=[B1, B2],
                       innovation=PSI, days=20_000, prompts_per_day=3, seed=13)
    phi0 = stationary_covariance([B1, B2], PSI)
    first = d.values[d.prompt == 1]
    sample = np.cov(first, rowvar=False)
    target = LAM @ phi0 @ LAM.T + np.diag(THETA)
    # Wishart standard error of a sample covariance: sqrt((s_ij^2 + s_ii s_jj) / n).
    se = np.sqrt((target ** 2 + np.outer(np.diag(target), np.diag(target))) / len(first))
    assert np.all(np.abs(sample - target) < 4.5 * se)


def test_diary_layout_and_missingness():
    d = simulate_diary(SPEC1, loadings=LAM, intercepts=NU, unique=THETA, lagged=[B1],
                       innovation=PSI, days=400, prompts_per_day=6, p_missed=0.2,
                       p_item_skip=0.05, seed=14)
    n = 400 * 6
    assert d.values.shape == (n, 4) and d.items == ("y1", "y2", "y3", "y4")
    assert np.array_equal(d.segment, np.repeat(np.arange(400), 6))
    assert np.array_equal(d.day, d.segment) and d.n_days == 400
    assert np.array_equal(d.prompt[:7], [1, 2, 3, 4, 5, 6, 1])
    missed = ~d.answered
    # Binomial standard errors: sqrt(p (1 - p) / n).
    assert abs(missed.mean() - 0.2) < 4 * np.sqrt(0.2 * 0.8 / n)
    skipped = np.isnan(d.values[~missed]).mean()
    assert abs(skipped - 0.05) < 4 * np.sqrt(0.05 * 0.95 / (n * 4 * 0.8))
    again = simulate_diary(SPEC1, loadings=LAM, intercepts=NU, unique=THETA, lagged=[B1],
                           innovation=PSI, days=400, prompts_per_day=6, p_missed=0.2,
                           p_item_skip=0.05, seed=14)
    assert np.array_equal(np.nan_to_num(again.values, nan=-1), np.nan_to_num(d.values, nan=-1))
