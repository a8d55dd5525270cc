"""Model-implied mean and covariance of a lag window, and the chain rule back to the
model matrices (reverse mode, so one gradient costs about one evaluation).

Window of depth L: the states of the L+1 copies xi = (eta_t, ..., eta_{t-L}) satisfy
xi = A xi + zeta~, where copy j regresses on copies j+1..j+q through B_1..B_q, and the
oldest q copies are exogenous with covariance P. Then
    Phi_xi = M Psi~ M',  M = (I - A)^-1,  Psi~ = blockdiag(Psi, ..., Psi, P)
    Sigma  = (I kron Lambda) Phi_xi (I kron Lambda)' + Theta~,   mu = (nu, ..., nu)
with Theta~ block (a, b) = diag(d^|a-b| theta) (unique parts autocorrelated with d).
First-copy-free adds latent intercepts c for the regressed copies: the copies' latent means
are m = M c~ (c~ = c for regressed copies, 0 for the oldest) and mu = (nu, ..., nu) + (I kron
Lambda) m, so the window means are free of stationarity too.
Stationary windows: P is the companion-form stationary covariance (discrete Lyapunov
equation), which makes Sigma block-Toeplitz. First-copy-free windows: P is free.
The Lyapunov step is differentiated by its adjoint: for f(P) with df/dP = H and
P = F P F' + Q, W = F' W F + H gives df/dQ = W and df/dF = 2 W F P.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from lagwise.models.lyapunov import companion, solve_lyapunov
from lagwise.models.parameters import Gradients, Matrices

STATIONARITY_LIMIT = 0.9999


class NotAdmissible(Exception):
    """Trial parameters outside the admissible region (not stationary, not positive definite)."""


@dataclass
class Implied:
    mu: np.ndarray
    sigma: np.ndarray
    lam_big: np.ndarray
    m_inv: np.ndarray
    latent_mean: np.ndarray | None
    phi_xi: np.ndarray
    comp: np.ndarray | None
    p_old: np.ndarray | None


def implied_moments(m: Matrices, depth: int, free_first_copies: bool = False) -> Implied:
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
        if free_first_copies:
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
    lagdist = np.abs(np.subtract.outer(np.arange(copies), np.arange(copies)))
    theta_blocks = m.theta[None, None, :] * m.d[None, None, :] ** lagdist[:, :, None]
    sigma = lam_big @ phi_xi @ lam_big.T + _block_diagonals(theta_blocks)
    mu = np.tile(m.nu, copies)
    latent_mean = None
    if m.c is not None:
        c_big = np.zeros(kk)
        c_big[:n_reg * k] = np.tile(m.c, n_reg)
        latent_mean = m_inv @ c_big
        mu = mu + lam_big @ latent_mean
    return Implied(mu=mu, sigma=sigma, lam_big=lam_big, m_inv=m_inv, latent_mean=latent_mean,
                   phi_xi=phi_xi, comp=comp, p_old=p_old)


def _block_diagonals(blocks: np.ndarray) -> np.ndarray:
    """(c, c, p) diagonals -> (c p, c p) matrix whose (a, b) block is diag(blocks[a, b])."""
    c, _, p = blocks.shape
    out = np.zeros((c, p, c, p))
    idx = np.arange(p)
    out[:, idx, :, idx] = blocks.transpose(2, 0, 1)
    return out.reshape(c * p, c * p)


def matrix_gradients(m: Matrices, imp: Implied, g_sigma: np.ndarray, g_mu: np.ndarray,
                     depth: int, free_first_copies: bool = False) -> Gradients:
    """Pull d loglik / d Sigma (symmetric, as in tr(G dSigma)) and d loglik / d mu back to
    the model matrices."""
    p, k = m.lam.shape
    q = m.lagged.shape[0]
    copies = depth + 1
    g_nu = g_mu.reshape(copies, p).sum(axis=0)
    # unique variances and their autocorrelation: diagonals of each (a, b) block of G
    gd_blocks = np.diagonal(g_sigma.reshape(copies, p, copies, p), axis1=1, axis2=3)
    lagdist = np.abs(np.subtract.outer(np.arange(copies), np.arange(copies)))[:, :, None]
    g_theta = np.sum(gd_blocks * m.d[None, None, :] ** lagdist, axis=(0, 1))
    g_d = np.sum(np.where(lagdist > 0, gd_blocks * m.theta * lagdist
                          * m.d[None, None, :] ** np.maximum(lagdist - 1, 0), 0.0), axis=(0, 1))
    # loadings
    g_lam_big = 2.0 * g_sigma @ imp.lam_big @ imp.phi_xi
    # latent covariance -> Psi~, A
    h_mat = imp.lam_big.T @ g_sigma @ imp.lam_big
    g_psi_big = imp.m_inv.T @ h_mat @ imp.m_inv
    g_a = 2.0 * imp.m_inv.T @ h_mat @ imp.phi_xi
    n_reg = copies - q if q > 0 else copies
    g_c = None
    if imp.latent_mean is not None:
        # mu += (I kron Lambda) M c~ : d/dLambda, d/dA = M' g m', d/dc~ = M' g with g = Lambda~' g_mu
        g_lam_big = g_lam_big + np.outer(g_mu, imp.latent_mean)
        g_m = imp.m_inv.T @ (imp.lam_big.T @ g_mu)
        g_a = g_a + np.outer(g_m, imp.latent_mean)
        g_c = g_m[:n_reg * k].reshape(n_reg, k).sum(axis=0)
    g_lam = sum(g_lam_big[j * p:(j + 1) * p, j * k:(j + 1) * k] for j in range(copies))
    g_lagged = np.zeros_like(m.lagged)
    for j in range(copies - q if q > 0 else 0):
        for lag in range(1, q + 1):
            g_lagged[lag - 1] += g_a[j * k:(j + 1) * k, (j + lag) * k:(j + lag + 1) * k]
    g_psi = sum(g_psi_big[j * k:(j + 1) * k, j * k:(j + 1) * k] for j in range(n_reg))
    g_phif = None
    if q > 0:
        g_p = g_psi_big[n_reg * k:, n_reg * k:]
        if free_first_copies:
            g_phif = g_p
        else:
            w = solve_lyapunov(imp.comp.T, g_p)
            g_psi = g_psi + w[:k, :k]
            g_comp = 2.0 * w @ imp.comp @ imp.p_old
            for lag in range(1, q + 1):
                g_lagged[lag - 1] += g_comp[:k, (lag - 1) * k:lag * k]
    return Gradients(nu=g_nu, lam=g_lam, theta=g_theta, d=g_d, lagged=g_lagged, psi=g_psi,
                     phif=g_phif, c=g_c)
