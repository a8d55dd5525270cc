"""Continuous-time dynamics: from a drift matrix A and a diffusion covariance W = GG' to the
discrete effects and innovations over an interval, and their reverse-mode derivatives.

For d eta = A (eta - mu) dt + G dW, over an interval D:
    B(D) = expm(A D),   Q(D) = int_0^D expm(A s) W expm(A' s) ds,
both from one matrix exponential (Van Loan 1978, "Computing integrals involving the matrix
exponential", IEEE Trans. Automatic Control 23:395-404, Theorem 1):
    expm(D [[-A, W], [0, A']]) = [[E11, E12], [0, E22]],  B = E22',  Q = E22' E12.
The stationary covariance S solves the continuous Lyapunov equation A S + S A' + W = 0 (it
exists when every eigenvalue of A has a negative real part).
For a stable drift with well-conditioned eigenvectors all of this comes instead from one
eigendecomposition (models.drifteigen), with Q(D) = S - B S B' in the derivatives; the
exponentials remain for the other drifts (nearly defective or unstable).
Derivatives in reverse mode: the adjoint of the Frechet derivative of expm at M is the
Frechet derivative at M' (see `_frechet_adjoint`), and the adjoint of the Lyapunov equation
is the Lyapunov equation of A'.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from scipy.linalg import solve_continuous_lyapunov

from lagwise.models.drifteigen import (Eigen, adjoint_lyapunov, decompose, exp_adjoint, exp_stack,
                                      integral_stack, stationary)
from lagwise.models.errors import EstimationError


_PADE = {   # [m/m] Pade coefficients b_0..b_m and the largest 1-norm each serves (Higham 2005)
    3: ((120.0, 60.0, 12.0, 1.0), 1.495585217958292e-2),
    5: ((30240.0, 15120.0, 3360.0, 420.0, 30.0, 1.0), 2.539398330063230e-1),
    7: ((17297280.0, 8648640.0, 1995840.0, 277200.0, 25200.0, 1512.0, 56.0, 1.0),
        9.504178996162932e-1),
    9: ((17643225600.0, 8821612800.0, 2075673600.0, 302702400.0, 30270240.0, 2162160.0,
         110880.0, 3960.0, 90.0, 1.0), 2.097847961257068),
    13: ((64764752532480000.0, 32382376266240000.0, 7771770303897600.0, 1187353796428800.0,
          129060195264000.0, 10559470521600.0, 670442572800.0, 33522128640.0, 1323241920.0,
          40840800.0, 960960.0, 16380.0, 182.0, 1.0), 5.371920351148152),
}


def expm_stack(x: np.ndarray) -> np.ndarray:
    """expm of each matrix of a stack (n, m, m), vectorised over the stack: scaling and
    squaring with [m/m] Pade approximants (Higham 2005, "The scaling and squaring method for
    the matrix exponential revisited", SIAM J. Matrix Anal. Appl. 26:1179-1193): the lowest
    order that serves the largest norm of the stack, else order 13 with each matrix scaled
    by its own power of two (scipy.linalg.expm does the same one matrix at a time)."""
    x = np.asarray(x, dtype=float)
    if x.shape[0] == 0:
        return x.copy()
    norm = np.abs(x).sum(axis=1).max(axis=1)
    order = next((m for m in (3, 5, 7, 9) if norm.max() <= _PADE[m][1]), 13)
    squarings = np.zeros(x.shape[0], dtype=int)
    if order == 13:
        squarings = np.maximum(0, np.ceil(np.log2(np.maximum(norm, 1e-300) / _PADE[13][1]))).astype(int)
    a = x / (2.0 ** squarings)[:, None, None]
    b = _PADE[order][0]
    eye = np.eye(x.shape[1])
    a2 = a @ a
    if order == 13:
        a4 = a2 @ a2
        a6 = a4 @ a2
        u = a @ (a6 @ (b[13] * a6 + b[11] * a4 + b[9] * a2) + b[7] * a6 + b[5] * a4 + b[3] * a2
                 + b[1] * eye)
        v = a6 @ (b[12] * a6 + b[10] * a4 + b[8] * a2) + b[6] * a6 + b[4] * a4 + b[2] * a2 + b[0] * eye
    else:
        power, u, v = eye, b[1] * eye, b[0] * eye
        for j in range(2, order + 1, 2):
            power = power @ a2
            u, v = u + b[j + 1] * power, v + b[j] * power
        u = a @ u
    r = np.linalg.solve(v - u, v + u)
    for n in range(int(squarings.max())):
        more = squarings > n
        r[more] = r[more] @ r[more]
    return r


def _generator(a: np.ndarray, w: np.ndarray) -> np.ndarray:
    k = a.shape[0]
    m = np.zeros((2 * k, 2 * k))
    m[:k, :k], m[:k, k:], m[k:, k:] = -a, w, a.T
    return m


LONG = 2.0   # an interval D is long when ||A||_1 D exceeds this (see `discrete_system`)


def _long(a: np.ndarray, d: np.ndarray) -> np.ndarray:
    """The intervals whose Q(D) comes from S - B S B' (A stable only)."""
    return d * np.linalg.norm(a, 1) > LONG if is_stable(a) else np.zeros(d.size, dtype=bool)


def discrete_system(a: np.ndarray, w: np.ndarray, intervals: np.ndarray
                    ) -> tuple[np.ndarray, np.ndarray]:
    """(B, Q), each (intervals, k, k): the discrete effects and innovation covariances over
    each interval, all intervals in one batched exponential. Over a long interval Van
    Loan's E12 grows like expm(-A D) and Q would lose every digit to cancellation; there (A
    stable) the equal Q(D) = S - B S B' (S stationary: its covariance over D is S) is used."""
    k = a.shape[0]
    d = np.asarray(intervals, dtype=float).reshape(-1)
    eig = _eigen(a)
    if eig is not None:
        q = integral_stack(eig, w, d)
        return exp_stack(eig, d), 0.5 * (q + q.transpose(0, 2, 1))
    long = _long(a, d)
    e = expm_stack(d[~long, None, None] * _generator(a, w)[None])
    b, q = np.empty((d.size, k, k)), np.empty((d.size, k, k))
    b[~long] = e[:, k:, k:].transpose(0, 2, 1)
    q[~long] = b[~long] @ e[:, :k, k:]
    if long.any():
        s = stationary_covariance(a, w)
        b[long] = expm_stack(d[long, None, None] * a[None])
        q[long] = s - b[long] @ s @ b[long].transpose(0, 2, 1)
    return b, 0.5 * (q + q.transpose(0, 2, 1))


def _frechet_adjoint(x: np.ndarray, e_bar: np.ndarray) -> np.ndarray:
    """L(X', E_bar) for a stack of X: the adjoint of the Frechet derivative of expm at X,
    through the block identity expm([[Y, F], [0, Y]]) = [[expm Y, L(Y, F)], [0, expm Y]]
    (Higham 2008, "Functions of Matrices", Theorem 3.6), one batched exponential
    (scipy.linalg.expm_frechet gives the same, one matrix at a time)."""
    n = x.shape[1]
    size = np.maximum(np.abs(e_bar).sum(axis=1).max(axis=1), 1e-300)[:, None, None]
    big = np.zeros((x.shape[0], 2 * n, 2 * n))
    big[:, :n, :n] = big[:, n:, n:] = x.transpose(0, 2, 1)
    big[:, :n, n:] = e_bar / size             # L is linear in its direction: keep it small
    return expm_stack(big)[:, :n, n:] * size


def discrete_adjoint(a: np.ndarray, w: np.ndarray, intervals: np.ndarray, b_bar: np.ndarray,
                     q_bar: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(dL/dA, dL/dW) from dL/dB and dL/dQ per interval (elements treated as independent),
    along the same two routes as `discrete_system`."""
    k = a.shape[0]
    d = np.asarray(intervals, dtype=float).reshape(-1)
    qs = 0.5 * (q_bar + q_bar.transpose(0, 2, 1))
    eig = _eigen(a)
    if eig is not None:
        return _stationary_route(a, w, exp_stack(eig, d), b_bar, qs,
                                 lambda bb: exp_adjoint(eig, d, bb))
    long = _long(a, d)
    a_bar, w_bar = np.zeros((k, k)), np.zeros((k, k))
    if (~long).any():
        dv = d[~long, None, None]
        m = dv * _generator(a, w)[None]
        e = expm_stack(m)
        e12, e22 = e[:, :k, k:], e[:, k:, k:]
        e_bar = np.zeros(m.shape)
        e_bar[:, :k, k:] = e22 @ qs[~long]                                   # Q = E22' E12
        e_bar[:, k:, k:] = b_bar[~long].transpose(0, 2, 1) + e12 @ qs[~long]  # B = E22', Q
        m_bar = (dv * _frechet_adjoint(m, e_bar)).sum(axis=0)
        a_bar += m_bar[k:, k:].T - m_bar[:k, :k]
        w_bar += m_bar[:k, k:]
    if long.any():
        dv = d[long, None, None]
        a_l, w_l = _stationary_route(
            a, w, expm_stack(dv * a[None]), b_bar[long], qs[long],
            lambda bb: (dv * _frechet_adjoint(dv * a[None], bb)).sum(axis=0))
        a_bar += a_l
        w_bar += w_l
    return a_bar, w_bar


def _stationary_route(a: np.ndarray, w: np.ndarray, b: np.ndarray, b_bar: np.ndarray,
                      q_bar: np.ndarray, exp_adjoint_sum) -> tuple[np.ndarray, np.ndarray]:
    """(dL/dA, dL/dW) through B = expm(A D) and Q = S - B S B' (A stable), given B per
    interval and `exp_adjoint_sum`, which turns dL/dB per interval into the summed dL/dA."""
    s = stationary_covariance(a, w)
    bb = b_bar - 2.0 * q_bar @ b @ s
    a_s, w_s = stationary_adjoint(a, s, (q_bar - b.transpose(0, 2, 1) @ q_bar @ b).sum(axis=0))
    return exp_adjoint_sum(bb) + a_s, w_s


def _eigen(a: np.ndarray) -> Eigen | None:
    """The eigendecomposition route (models.drifteigen) for a stable, well-conditioned A;
    None sends `discrete_system` and `discrete_adjoint` to the matrix exponentials. The last
    few drifts are remembered: one likelihood evaluation asks for the same A several times."""
    a = np.ascontiguousarray(a, dtype=float)
    return _eigen_of(a.tobytes(), a.shape[0])


@lru_cache(maxsize=4)
def _eigen_of(key: bytes, k: int) -> Eigen | None:
    a = np.frombuffer(key).reshape(k, k)
    return decompose(a) if is_stable(a) else None


def stationary_covariance(a: np.ndarray, w: np.ndarray) -> np.ndarray:
    """S with A S + S A' + W = 0 (from the eigendecomposition where it serves, else by
    scipy's Lyapunov solver); EstimationError when A is not stable."""
    eig = _eigen(a)
    if eig is not None:
        s = stationary(eig, w)
    elif not is_stable(a):
        raise EstimationError("The drift matrix is not stable (an eigenvalue has a real part "
                              "of 0 or more): the states have no stationary distribution.")
    else:
        s = solve_continuous_lyapunov(a, -w)
    return 0.5 * (s + s.T)


def stationary_adjoint(a: np.ndarray, s: np.ndarray, s_bar: np.ndarray
                       ) -> tuple[np.ndarray, np.ndarray]:
    """(dL/dA, dL/dW) from dL/dS at the stationary S: with X solving A'X + XA + sym(S_bar) = 0,
    dL/dW = X and dL/dA = 2 X S."""
    eig = _eigen(a)
    rhs = 0.5 * (s_bar + s_bar.T)
    x = adjoint_lyapunov(eig, rhs) if eig is not None else solve_continuous_lyapunov(a.T, -rhs)
    x = 0.5 * (x + x.T)
    return 2.0 * x @ s, x


def is_stable(a: np.ndarray) -> bool:
    """Every eigenvalue of A has a negative real part."""
    eig = np.linalg.eigvals(a)
    return bool(np.all(np.isfinite(eig)) and np.max(eig.real) < 0.0)
