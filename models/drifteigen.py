"""B(D) = expm(A D), Q(D) and the adjoint of B's derivative for many intervals D from one
eigendecomposition of the drift, A = V diag(lam) V^-1 (complex in general):
    B(D) = V diag(exp(lam D)) V^-1,
    Q(D) = V [Wt_ij (exp(s_ij D) - 1) / s_ij] V^H,  s_ij = lam_i + conj(lam_j),
           Wt = V^-1 W V^-H (the integral of Q's definition taken entry by entry),
    d expm(A D)[E] = V ((V^-1 E V) o Phi(D)) V^-1,
           Phi_ij = (exp(lam_i D) - exp(lam_j D)) / (lam_i - lam_j),  Phi_ii = D exp(lam_i D)
(Daleckii-Krein; Higham 2008, "Functions of Matrices", Theorem 3.11). The stationary
covariance (A S + S A' + W = 0) is Q's limit, S = V [-Wt_ij / s_ij] V^H, and the adjoint
equation A' X + X A + E = 0 has X = V^-H [-(V^H E V)_ij / conj(s_ij)] V^-1 (both Lyapunov
equations diagonalised by the eigenvectors). Quotients of the form
(exp(z) - 1) / z go through expm1, so coinciding eigenvalues and vanishing s_ij take their
limits without cancellation. The eigenvector matrix must be well conditioned (errors grow
like cond(V) times the rounding unit): `decompose` declines otherwise (a nearly defective
drift), and models.drift then uses the matrix exponentials.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

MAX_CONDITION = 1e6   # cond(V) above which the eigen route would lose more than ~1e-10


@dataclass(frozen=True)
class Eigen:
    """A = v diag(lam) v_inv."""

    lam: np.ndarray
    v: np.ndarray
    v_inv: np.ndarray


def decompose(a: np.ndarray) -> Eigen | None:
    """The eigendecomposition of A, or None when it is not finite or V is ill-conditioned."""
    if not np.all(np.isfinite(a)):
        return None
    lam, v = np.linalg.eig(a)
    if not np.all(np.isfinite(lam)) or np.linalg.cond(v) > MAX_CONDITION:
        return None
    return Eigen(lam, v, np.linalg.inv(v))


def _phi1(z: np.ndarray) -> np.ndarray:
    """(exp(z) - 1) / z, 1 at z = 0."""
    zero = z == 0
    return np.where(zero, 1.0, np.expm1(z) / np.where(zero, 1.0, z))


def exp_stack(e: Eigen, d: np.ndarray) -> np.ndarray:
    """B(D) for each interval, (n, k, k): B_ab = sum_i exp(lam_i D) V_ai V^-1_ib, all intervals
    in one matrix product."""
    k = e.lam.size
    basis = np.einsum("ai,ib->iab", e.v, e.v_inv).reshape(k, k * k)
    return (np.exp(np.outer(d, e.lam)) @ basis).real.reshape(-1, k, k)


def integral_stack(e: Eigen, w: np.ndarray, d: np.ndarray) -> np.ndarray:
    """Q(D) = int_0^D expm(A s) W expm(A' s) ds for each interval, (n, k, k):
    Q_ab = sum_ij V_ai Wt_ij conj(V_bj) (exp(s_ij D) - 1) / s_ij, one matrix product."""
    k = e.lam.size
    wt = e.v_inv @ w @ e.v_inv.conj().T
    basis = np.einsum("ai,ij,bj->ijab", e.v, wt, e.v.conj()).reshape(k * k, k * k)
    s = (e.lam[:, None] + e.lam.conj()[None, :]).reshape(-1)
    psi = d[:, None] * _phi1(d[:, None] * s[None])
    return (psi @ basis).real.reshape(-1, k, k)


def _divided_differences(e: Eigen, d: np.ndarray) -> np.ndarray:
    """Phi(D) of the module docstring, (n, k, k): D exp(lam_j D) phi1((lam_i - lam_j) D) with
    j the one of the pair with the larger real part (phi1 of a number with real part <= 0)."""
    lam = e.lam
    first = lam[:, None].real >= lam[None, :].real
    base = np.where(first, lam[:, None], lam[None, :])
    gap = np.where(first, lam[None, :] - lam[:, None], lam[:, None] - lam[None, :])
    dd = d[:, None, None]
    return dd * np.exp(dd * base[None]) * _phi1(dd * gap[None])


def exp_adjoint(e: Eigen, d: np.ndarray, b_bar: np.ndarray) -> np.ndarray:
    """sum over intervals of the adjoint of d expm(A D)[.] applied to B_bar(D): dL/dA, (k, k)."""
    k = e.lam.size
    vh, vinv_h = e.v.conj().T, e.v_inv.conj().T
    pairs = b_bar.reshape(-1, k * k).T @ _divided_differences(e, d).conj().reshape(-1, k * k)
    inner = np.einsum("ia,bj,abij->ij", vh, vinv_h, pairs.reshape(k, k, k, k))
    return (vinv_h @ inner @ vh).real


def stationary(e: Eigen, w: np.ndarray) -> np.ndarray:
    """S with A S + S A' + W = 0 (A stable): S = V [-Wt_ij / s_ij] V^H."""
    wt = e.v_inv @ w @ e.v_inv.conj().T
    s = -(e.lam[:, None] + e.lam.conj()[None, :])
    return (e.v @ (wt / s) @ e.v.conj().T).real


def adjoint_lyapunov(e: Eigen, rhs: np.ndarray) -> np.ndarray:
    """X with A' X + X A + E = 0 (A stable): X = V^-H [-(V^H E V)_ij / (conj lam_i + lam_j)]
    V^-1."""
    et = e.v.conj().T @ rhs @ e.v
    s = -(e.lam.conj()[:, None] + e.lam[None, :])
    return (e.v_inv.conj().T @ (et / s) @ e.v_inv).real
