"""Model-implied mean and covariance of a lag window, and the chain rule back to the
model matrices (reverse mode, so one gradient costs about one evaluation).

Window of depth L: the states of the L+1 copies xi = (eta_t, ..., eta_{t-L}) satisfy
xi = A xi + zeta~, where copy j regresses on copies j+1..j+q through B_1..B_q, and the
oldest q copies are exogenous with covariance P. Then
    Phi_xi = M Psi~ M',  M = (I - A)^-1,  Psi~ = blockdiag(Psi, ..., Psi, P)
    Sigma  = (I kron Lambda) Phi_xi (I kron Lambda)' + Theta~,   mu = (nu, ..., nu)
with Theta~ block (a, b) = diag(d^|a-b| theta) (unique parts autocorrelated with d).
Estimator "stationary": P is the companion-form stationary covariance (discrete Lyapunov
equation), which makes Sigma block-Toeplitz. Estimator "first-copy-free": P is free.
The Lyapunov step is differentiated by its adjoint: for f(P) with df/dP = H and
P = F P F' + Q, W = F' W F + H gives df/dQ = W and df/dF = 2 W F P.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from models.lyapunov import companion, solve_lyapunov
from models.parameters import Gradients, Matrices

STATIONARITY_LIMIT = 0.9999


class NotAdmissible(Exception):
    """Trial parameters outside the admissible region (not stationary, not positive definite)."""


@dataclass
class Implied:
    mu: np.ndarray
    sigma: np.ndarray
    lam_big: np.ndarray
    m_inv: np.ndarray
    phi_xi: np.ndarray
    comp: np.ndarray | None
    p_old: np.ndarray | None


def implied_moments(m: Matrices, depth: int, estimator: str) -> Implied:
    p, k = m.lam.shape
    q = m.lagged.shape[0]
    copies = depth + 1
    kk = k * copies
    a = np.zeros((kk, kk))
    for j in range(copies - q):
        for lag in range(1, q + 1):
            a[j * k:(j + 1) * k, (j + lag) * k:(j + lag + 1) * k] = m.lagged[lag - 1]
    psi_big = np.zeros((kk, kk))
    n_reg = copies - q if q > 0 else copies
    for j in range(n_reg):
        psi_big[j * k:(j + 1) * k, j * k:(j + 1) * k] = m.psi
    comp = p_old = None
    if q > 0:
        if estimator == "first-copy-free":
            p_old = m.phif
        else:
            comp = companion(list(m.lagged))
            if np.max(np.abs(np.linalg.eigvals(comp))) >= STATIONARITY_LIMIT:
                raise NotAdmissible("not stationary")
            big_q = np.zeros((q * k, q * k))
            big_q[:k, :k] = m.psi
            p_old = solve_lyapunov(comp, big_q)
        psi_big[n_reg * k:, n_reg * k:] = p_old
    m_inv = np.linalg.inv(np.eye(kk) - a)
    phi_xi = m_inv @ psi_big @ m_inv.T
    lam_big = np.kron(np.eye(copies), m.lam)
    sigma = lam_big @ phi_xi @ lam_big.T
    for ca in range(copies):
        for cb in range(copies):
            h = abs(ca - cb)
            dvec = m.theta * (m.d ** h)
            idx_a = np.arange(ca * p, (ca + 1) * p)
            idx_b = np.arange(cb * p, (cb + 1) * p)
            sigma[idx_a, idx_b] += dvec
    mu = np.tile(m.nu, copies)
    return Implied(mu=mu, sigma=sigma, lam_big=lam_big, m_inv=m_inv, phi_xi=phi_xi, comp=comp, p_old=p_old)


def matrix_gradients(m: Matrices, imp: Implied, g_sigma: np.ndarray, g_mu: np.ndarray,
                     depth: int, estimator: str) -> Gradients:
    """Pull d loglik / d Sigma (symmetric, as in tr(G dSigma)) and d loglik / d mu back to
    the model matrices."""
    p, k = m.lam.shape
    q = m.lagged.shape[0]
    copies = depth + 1
    g_nu = g_mu.reshape(copies, p).sum(axis=0)
    # unique variances and their autocorrelation
    gd_blocks = np.empty((copies, copies, p))
    for ca in range(copies):
        for cb in range(copies):
            gd_blocks[ca, cb] = np.diag(g_sigma[ca * p:(ca + 1) * p, cb * p:(cb + 1) * p])
    lagdist = np.abs(np.subtract.outer(np.arange(copies), np.arange(copies)))
    g_theta = np.zeros(p)
    g_d = np.zeros(p)
    for ca in range(copies):
        for cb in range(copies):
            h = lagdist[ca, cb]
            g_theta += gd_blocks[ca, cb] * m.d ** h
            if h > 0:
                g_d += gd_blocks[ca, cb] * m.theta * h * m.d ** (h - 1)
    # loadings
    g_lam_big = 2.0 * g_sigma @ imp.lam_big @ imp.phi_xi
    g_lam = sum(g_lam_big[j * p:(j + 1) * p, j * k:(j + 1) * k] for j in range(copies))
    # latent covariance -> Psi~, A
    h_mat = imp.lam_big.T @ g_sigma @ imp.lam_big
    g_psi_big = imp.m_inv.T @ h_mat @ imp.m_inv
    g_a = 2.0 * imp.m_inv.T @ h_mat @ imp.phi_xi
    g_lagged = np.zeros_like(m.lagged)
    n_reg = copies - q if q > 0 else copies
    for j in range(copies - q if q > 0 else 0):
        for lag in range(1, q + 1):
            g_lagged[lag - 1] += g_a[j * k:(j + 1) * k, (j + lag) * k:(j + lag + 1) * k]
    g_psi = sum(g_psi_big[j * k:(j + 1) * k, j * k:(j + 1) * k] for j in range(n_reg))
    g_phif = None
    if q > 0:
        g_p = g_psi_big[n_reg * k:, n_reg * k:]
        if estimator == "first-copy-free":
            g_phif = g_p
        else:
            w = solve_lyapunov(imp.comp.T, g_p)
            g_psi = g_psi + w[:k, :k]
            g_comp = 2.0 * w @ imp.comp @ imp.p_old
            for lag in range(1, q + 1):
                g_lagged[lag - 1] += g_comp[:k, (lag - 1) * k:lag * k]
    return Gradients(nu=g_nu, lam=g_lam, theta=g_theta, d=g_d, lagged=g_lagged, psi=g_psi, phif=g_phif)
