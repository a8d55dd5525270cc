"""Continuous-time dynamics: from a drift matrix A and a diffusion covariance W = GG' to the
discrete effects and innovations over an interval, and their reverse-mode derivatives.

For d eta = A (eta - mu) dt + G dW, over an interval D:
    B(D) = expm(A D),   Q(D) = int_0^D expm(A s) W expm(A' s) ds,
both from one matrix exponential (Van Loan 1978, "Computing integrals involving the matrix
exponential", IEEE Trans. Automatic Control 23:395-404, Theorem 1):
    expm(D [[-A, W], [0, A']]) = [[E11, E12], [0, E22]],  B = E22',  Q = E22' E12.
The stationary covariance S solves the continuous Lyapunov equation A S + S A' + W = 0 (it
exists when every eigenvalue of A has a negative real part).
Derivatives in reverse mode: the adjoint of the Frechet derivative of expm at M is the
Frechet derivative at M' (scipy.linalg.expm_frechet), and the adjoint of the Lyapunov
equation is the Lyapunov equation of A'.
"""

from __future__ import annotations

import numpy as np
from scipy.linalg import expm, expm_frechet, solve_continuous_lyapunov

from lagwise.models.errors import EstimationError


def _generator(a: np.ndarray, w: np.ndarray) -> np.ndarray:
    k = a.shape[0]
    m = np.zeros((2 * k, 2 * k))
    m[:k, :k], m[:k, k:], m[k:, k:] = -a, w, a.T
    return m


def discrete_system(a: np.ndarray, w: np.ndarray, intervals: np.ndarray
                    ) -> tuple[np.ndarray, np.ndarray]:
    """(B, Q), each (intervals, k, k): the discrete effects and innovation covariances over
    each interval (Van Loan's block exponential, all intervals in one batched call)."""
    k = a.shape[0]
    d = np.asarray(intervals, dtype=float).reshape(-1)
    e = expm(d[:, None, None] * _generator(a, w)[None])
    b = e[:, k:, k:].transpose(0, 2, 1)
    q = b @ e[:, :k, k:]
    return b, 0.5 * (q + q.transpose(0, 2, 1))


def discrete_adjoint(a: np.ndarray, w: np.ndarray, intervals: np.ndarray, b_bar: np.ndarray,
                     q_bar: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(dL/dA, dL/dW) from dL/dB and dL/dQ per interval (elements treated as independent)."""
    k = a.shape[0]
    gen = _generator(a, w)
    a_bar, w_bar = np.zeros((k, k)), np.zeros((k, k))
    for d, bb, qb in zip(np.asarray(intervals, dtype=float).reshape(-1), b_bar, q_bar):
        e = expm(d * gen)
        e12, e22 = e[:k, k:], e[k:, k:]
        qs = 0.5 * (qb + qb.T)
        e_bar = np.zeros((2 * k, 2 * k))
        e_bar[:k, k:] = e22 @ qs              # Q = E22' E12
        e_bar[k:, k:] = bb.T + e12 @ qs.T     # B = E22', and Q again
        m_bar = d * expm_frechet(d * gen.T, e_bar, compute_expm=False)
        a_bar += m_bar[k:, k:].T - m_bar[:k, :k]
        w_bar += m_bar[:k, k:]
    return a_bar, w_bar


def stationary_covariance(a: np.ndarray, w: np.ndarray) -> np.ndarray:
    """S with A S + S A' + W = 0; EstimationError when A is not stable."""
    if not is_stable(a):
        raise EstimationError("The drift matrix is not stable (an eigenvalue has a real part "
                              "of 0 or more): the states have no stationary distribution.")
    s = solve_continuous_lyapunov(a, -w)
    return 0.5 * (s + s.T)


def stationary_adjoint(a: np.ndarray, s: np.ndarray, s_bar: np.ndarray
                       ) -> tuple[np.ndarray, np.ndarray]:
    """(dL/dA, dL/dW) from dL/dS at the stationary S: with X solving A'X + XA + sym(S_bar) = 0,
    dL/dW = X and dL/dA = 2 X S."""
    x = solve_continuous_lyapunov(a.T, -0.5 * (s_bar + s_bar.T))
    x = 0.5 * (x + x.T)
    return 2.0 * x @ s, x


def is_stable(a: np.ndarray) -> bool:
    """Every eigenvalue of A has a negative real part."""
    eig = np.linalg.eigvals(a)
    return bool(np.all(np.isfinite(eig)) and np.max(eig.real) < 0.0)
