"""The eigendecomposition route of models.drift (models.drifteigen) against the matrix
exponential route (Van Loan's exponential, S - B S B' over long intervals, Frechet adjoints by
the block exponential), which tests/test_continuous_time.py checks against scipy's expm,
expm_frechet and quad_vec; and the fallback to that route for a defective drift."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import quad_vec
from scipy.linalg import expm
from scipy.stats import ortho_group

from lagwise.models import drift
from lagwise.models.drift import discrete_adjoint, discrete_system
from lagwise.models.drifteigen import decompose

INTERVALS = np.geomspace(0.01, 50.0, 40)   # both exponential routes: short and long intervals


def _random_stable(k: int, rng: np.random.Generator) -> np.ndarray:
    a = rng.normal(size=(k, k))
    return a - (np.max(np.linalg.eigvals(a).real) + rng.uniform(0.05, 1.0)) * np.eye(k)


def _drifts() -> list[np.ndarray]:
    rng = np.random.default_rng(7)
    drifts = [_random_stable(k, rng) for k in (2, 3, 3, 4, 5, 6)]
    rotation = np.array([[-0.3, 2.5], [-2.5, -0.3]])                  # eigenvalues -0.3 +- 2.5i
    v = rng.normal(size=(3, 3))
    block = np.zeros((3, 3))
    block[:2, :2], block[2, 2] = rotation, -1.2
    drifts.append(v @ block @ np.linalg.inv(v))                      # complex, not normal
    q = ortho_group.rvs(3, random_state=3)
    for lam in ([-0.8, -0.8 - 1e-9, -2.0], [-0.8, -0.8, -0.8], [-0.5, -0.5 + 1e-13, -0.5]):
        drifts.append(q @ np.diag(lam) @ q.T)                        # (nearly) equal eigenvalues
    return drifts


def _exponential_route(monkeypatch, *args, adjoint=False):
    with monkeypatch.context() as m:
        m.setattr(drift, "_eigen", lambda a: None)
        return (discrete_adjoint if adjoint else discrete_system)(*args)


@pytest.mark.parametrize("a", _drifts())
def test_eigen_route_equals_the_exponential_route(a, monkeypatch):
    rng = np.random.default_rng(a.shape[0])
    k = a.shape[0]
    g = rng.normal(size=(k, k))
    w = g @ g.T + 0.1 * np.eye(k)
    assert decompose(a) is not None and drift._eigen(a) is not None
    b, q = discrete_system(a, w, INTERVALS)
    b0, q0 = _exponential_route(monkeypatch, a, w, INTERVALS)
    np.testing.assert_allclose(b, b0, rtol=0, atol=1e-10 * np.abs(b0).max())
    np.testing.assert_allclose(q, q0, rtol=0, atol=1e-10 * np.abs(q0).max())
    b_bar, q_bar = rng.normal(size=(2, INTERVALS.size, k, k))
    a_bar, w_bar = discrete_adjoint(a, w, INTERVALS, b_bar, q_bar)
    a0, w0 = _exponential_route(monkeypatch, a, w, INTERVALS, b_bar, q_bar, adjoint=True)
    np.testing.assert_allclose(a_bar, a0, rtol=0, atol=1e-10 * np.abs(a0).max())
    np.testing.assert_allclose(w_bar, w0, rtol=0, atol=1e-10 * np.abs(w0).max())


def test_a_stable_drift_takes_no_matrix_exponential(monkeypatch):
    # the eigen route serves every interval: the stacked exponential is never called
    def refuse(x):
        raise AssertionError("matrix exponential called")

    monkeypatch.setattr(drift, "expm_stack", refuse)
    a = _drifts()[1]
    k = a.shape[0]
    discrete_system(a, np.eye(k), INTERVALS)
    discrete_adjoint(a, np.eye(k), INTERVALS, np.ones((INTERVALS.size, k, k)),
                     np.ones((INTERVALS.size, k, k)))


def test_a_defective_drift_falls_back_to_the_exponentials():
    # a Jordan block has one eigenvector: V is singular, the eigen route is declined, and B, Q
    # still match scipy's expm and quad_vec (the integral defining Q)
    a = np.array([[-1.0, 1.0, 0.0], [0.0, -1.0, 1.0], [0.0, 0.0, -1.0]])
    w = np.diag([1.0, 0.5, 0.8])
    assert decompose(a) is None and drift._eigen(a) is None
    intervals = np.array([0.3, 2.0, 9.0])
    b, q = discrete_system(a, w, intervals)
    for d, bd, qd in zip(intervals, b, q):
        np.testing.assert_allclose(bd, expm(a * d), atol=1e-13)
        integral = quad_vec(lambda s: expm(a * s) @ w @ expm(a.T * s), 0.0, d,
                            epsabs=1e-13, epsrel=1e-12)[0]
        np.testing.assert_allclose(qd, integral, atol=1e-11)
