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
Where each matrix goes in the window (the blocks of A, Psi~, I kron Lambda and Theta~) depends
only on (p, k, q, depth): `window_shape` computes those positions once, so an evaluation fills
and reads them with single indexed operations.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from lagwise.models.lyapunov import companion, solve_lyapunov
from lagwise.models.parameters import Gradients, Matrices

STATIONARITY_LIMIT = 0.9999


class NotAdmissible(Exception):
    """Trial parameters outside the admissible region (not stationary, not positive definite)."""


@dataclass(frozen=True, eq=False)
class WindowShape:
    """Positions of the model matrices in a window of `copies` copies (see module docstring).

    Each (rows, cols, source) triple places source-indexed entries of a flattened matrix:
    A gets B_1..B_q (flattened (q, k, k)), Psi~ gets Psi on the regressed copies, I kron
    Lambda gets Lambda on every copy, Theta~ gets theta_i d_i^|a-b| at (a p + i, b p + i).
    """

    p: int
    k: int
    q: int
    copies: int
    n_reg: int
    a_at: tuple[np.ndarray, np.ndarray, np.ndarray]
    psi_at: tuple[np.ndarray, np.ndarray, np.ndarray]
    lam_at: tuple[np.ndarray, np.ndarray, np.ndarray]
    theta_at: tuple[np.ndarray, np.ndarray, np.ndarray]
    theta_lag: np.ndarray     # |a - b| of each Theta~ entry
    item_of: np.ndarray       # the item of each window column (column a p + i: item i)
    state_of: np.ndarray      # the state of each latent copy (copy a state j: a k + j)

    @property
    def kk(self) -> int:
        return self.k * self.copies

    @property
    def width(self) -> int:
        return self.p * self.copies


@lru_cache(maxsize=64)
def window_shape(p: int, k: int, q: int, depth: int) -> WindowShape:
    copies = depth + 1
    n_reg = copies - q if q > 0 else copies
    def blocks(pairs, size_i, size_j, src_of):
        rows, cols, src = [], [], []
        for (bi, bj), s in zip(pairs, src_of):
            ii, jj = np.divmod(np.arange(size_i * size_j), size_j)
            rows.append(bi * size_i + ii)
            cols.append(bj * size_j + jj)
            src.append(s * size_i * size_j + np.arange(size_i * size_j))
        if not rows:
            return np.zeros(0, int), np.zeros(0, int), np.zeros(0, int)
        return np.concatenate(rows), np.concatenate(cols), np.concatenate(src)

    a_pairs = [(j, j + lag) for j in range(copies - q if q else 0) for lag in range(1, q + 1)]
    a_at = blocks(a_pairs, k, k, [col - row - 1 for row, col in a_pairs])
    psi_at = blocks([(j, j) for j in range(n_reg)], k, k, [0] * n_reg)
    lam_at = blocks([(j, j) for j in range(copies)], p, k, [0] * copies)
    a_idx, b_idx, i_idx = np.meshgrid(np.arange(copies), np.arange(copies), np.arange(p), indexing="ij")
    theta_at = ((a_idx * p + i_idx).ravel(), (b_idx * p + i_idx).ravel(), i_idx.ravel())
    return WindowShape(p=p, k=k, q=q, copies=copies, n_reg=n_reg, a_at=a_at, psi_at=psi_at,
                       lam_at=lam_at, theta_at=theta_at,
                       theta_lag=np.abs(a_idx - b_idx).ravel().astype(float),
                       item_of=np.tile(np.arange(p), copies), state_of=np.tile(np.arange(k), copies))


def _inverse_nilpotent(a: np.ndarray, copies: int) -> np.ndarray:
    """(I - A)^-1 = I + A + ... + A^(copies-1): copies only regress on older copies, so A is
    block strictly upper triangular and A^copies = 0."""
    out, term = a + np.eye(a.shape[0]), a
    for _ in range(copies - 2):
        term = term @ a
        out += term
    return out


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
    psi_big: np.ndarray


def implied_moments(m: Matrices, depth: int, free_first_copies: bool = False) -> Implied:
    p, k = m.lam.shape
    q = m.lagged.shape[0]
    shape = window_shape(p, k, q, depth)
    kk, n_reg = shape.kk, shape.n_reg
    a = np.zeros((kk, kk))
    rows, cols, src = shape.a_at
    a[rows, cols] = m.lagged.ravel()[src]
    psi_big = np.zeros((kk, kk))
    rows, cols, src = shape.psi_at
    psi_big[rows, cols] = m.psi.ravel()[src]
    comp = p_old = None
    if q > 0:
        if free_first_copies:
            p_old = m.phif
        else:
            comp = companion(m.lagged)
            if np.max(np.abs(np.linalg.eigvals(comp))) >= STATIONARITY_LIMIT:
                raise NotAdmissible("not stationary")
            big_q = np.zeros((q * k, q * k))
            big_q[:k, :k] = m.psi
            p_old = solve_lyapunov(comp, big_q)
        psi_big[n_reg * k:, n_reg * k:] = p_old
    m_inv = _inverse_nilpotent(a, shape.copies)
    phi_xi = m_inv @ psi_big @ m_inv.T
    lam_big = np.zeros((shape.width, kk))
    rows, cols, src = shape.lam_at
    lam_big[rows, cols] = m.lam.ravel()[src]
    sigma = lam_big @ phi_xi @ lam_big.T
    rows, cols, src = shape.theta_at
    if m.d.any():
        sigma[rows, cols] += m.theta[src] * m.d[src] ** shape.theta_lag
    else:
        sigma.flat[::shape.width + 1] += m.theta[shape.item_of]
    mu = m.nu[shape.item_of]
    latent_mean = None
    if m.c is not None:
        c_big = np.zeros(kk)
        c_big[:n_reg * k] = m.c[shape.state_of[:n_reg * k]]
        latent_mean = m_inv @ c_big
        mu = mu + lam_big @ latent_mean
    return Implied(mu=mu, sigma=sigma, lam_big=lam_big, m_inv=m_inv, latent_mean=latent_mean,
                   phi_xi=phi_xi, comp=comp, p_old=p_old, psi_big=psi_big)


def matrix_gradients(m: Matrices, imp: Implied, g_sigma: np.ndarray, g_mu: np.ndarray,
                     depth: int, free_first_copies: bool = False) -> Gradients:
    """Pull d loglik / d Sigma (symmetric, as in tr(G dSigma)) and d loglik / d mu back to
    the model matrices."""
    p, k = m.lam.shape
    q = m.lagged.shape[0]
    shape = window_shape(p, k, q, depth)
    n_reg = shape.n_reg
    g_nu = g_mu.reshape(shape.copies, p).sum(axis=0)
    # unique variances and their autocorrelation: the Theta~ entries of G
    rows, cols, src = shape.theta_at
    g_entries = g_sigma[rows, cols]
    lag = shape.theta_lag
    d_src = m.d[src]
    g_theta = np.bincount(src, g_entries * d_src ** lag, minlength=p)
    g_d = np.bincount(src, np.where(lag > 0, g_entries * m.theta[src] * lag
                                    * d_src ** np.maximum(lag - 1, 0), 0.0), minlength=p)
    # loadings
    g_lam_big = 2.0 * g_sigma @ imp.lam_big @ imp.phi_xi
    # latent covariance -> Psi~, A
    h_mat = imp.lam_big.T @ g_sigma @ imp.lam_big
    g_psi_big = imp.m_inv.T @ h_mat @ imp.m_inv
    g_a = 2.0 * imp.m_inv.T @ h_mat @ imp.phi_xi
    g_c = None
    if imp.latent_mean is not None:
        # mu += (I kron Lambda) M c~ : d/dLambda, d/dA = M' g m', d/dc~ = M' g with g = Lambda~' g_mu
        g_lam_big = g_lam_big + np.outer(g_mu, imp.latent_mean)
        g_m = imp.m_inv.T @ (imp.lam_big.T @ g_mu)
        g_a = g_a + np.outer(g_m, imp.latent_mean)
        g_c = g_m[:n_reg * k].reshape(n_reg, k).sum(axis=0)
    rows, cols, src = shape.lam_at
    g_lam = np.bincount(src, g_lam_big[rows, cols], minlength=p * k).reshape(p, k)
    rows, cols, src = shape.a_at
    g_lagged = np.bincount(src, g_a[rows, cols], minlength=q * k * k).reshape(q, k, k)
    rows, cols, src = shape.psi_at
    g_psi = np.bincount(src, g_psi_big[rows, cols], minlength=k * k).reshape(k, k)
    g_phif = None
    if q > 0:
        g_p = g_psi_big[n_reg * k:, n_reg * k:]
        if free_first_copies:
            g_phif = g_p
        else:
            w = solve_lyapunov(imp.comp.T, g_p)
            g_psi = g_psi + w[:k, :k]
            g_comp = 2.0 * w @ imp.comp @ imp.p_old
            g_lagged += g_comp[:k].reshape(k, q, k).transpose(1, 0, 2)
    return Gradients(nu=g_nu, lam=g_lam, theta=g_theta, d=g_d, lagged=g_lagged, psi=g_psi,
                     phif=g_phif, c=g_c)


def moment_jacobian(m: Matrices, dm: Matrices, imp: Implied, depth: int,
                    free_first_copies: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """d mu and d Sigma of the window along each direction of `dm` (matrices batched along a
    first axis, e.g. ParameterLayout.directions): forward mode through the model,
    dM = M dA M, dPhi = dM Psi~ M' + M dPsi~ M' + M Psi~ dM',
    dSigma = dL Phi L' + L dPhi L' + L Phi dL' + dTheta~ (L = I kron Lambda), the
    stationary oldest copies by the Lyapunov equation dP = F dP F' + dF P F' + F P dF' + dQ.
    Returns (n, width) and (n, width, width)."""
    p, k = m.lam.shape
    q = m.lagged.shape[0]
    shape = window_shape(p, k, q, depth)
    n, kk, w, n_reg = dm.lam.shape[0], shape.kk, shape.width, shape.n_reg
    d_a = np.zeros((n, kk, kk))
    rows, cols, src = shape.a_at
    d_a[:, rows, cols] = dm.lagged.reshape(n, -1)[:, src]
    d_psi = np.zeros((n, kk, kk))
    rows, cols, src = shape.psi_at
    d_psi[:, rows, cols] = dm.psi.reshape(n, -1)[:, src]
    if q > 0:
        if free_first_copies:
            d_old = dm.phif
        else:
            comp, p_old = imp.comp, imp.p_old
            d_comp = np.zeros((n, q * k, q * k))
            d_comp[:, :k, :] = dm.lagged.transpose(0, 2, 1, 3).reshape(n, k, q * k)
            rhs = d_comp @ (p_old @ comp.T)
            rhs = rhs + rhs.transpose(0, 2, 1)
            rhs[:, :k, :k] += dm.psi
            size = q * k
            kron = np.eye(size * size) - np.kron(comp, comp)
            d_old = np.linalg.solve(kron, rhs.reshape(n, -1).T).T.reshape(n, size, size)
            d_old = 0.5 * (d_old + d_old.transpose(0, 2, 1))
        d_psi[:, n_reg * k:, n_reg * k:] = d_old
    m_inv, phi = imp.m_inv, imp.phi_xi
    d_m = m_inv @ d_a @ m_inv
    half = d_m @ imp.psi_big @ m_inv.T
    d_phi = half + half.transpose(0, 2, 1) + m_inv @ d_psi @ m_inv.T
    d_lam = np.zeros((n, w, kk))
    rows, cols, src = shape.lam_at
    d_lam[:, rows, cols] = dm.lam.reshape(n, -1)[:, src]
    lam_big = imp.lam_big
    half = d_lam @ (phi @ lam_big.T)
    d_sigma = half + half.transpose(0, 2, 1) + lam_big @ d_phi @ lam_big.T
    rows, cols, src = shape.theta_at
    lag = shape.theta_lag
    d_src = m.d[src]
    d_sigma[:, rows, cols] += (dm.theta[:, src] * d_src ** lag
                               + dm.d[:, src] * m.theta[src] * lag * d_src ** np.maximum(lag - 1, 0))
    d_mu = dm.nu[:, shape.item_of]
    if imp.latent_mean is not None:
        c_big = np.zeros(kk)
        c_big[:n_reg * k] = m.c[shape.state_of[:n_reg * k]]
        d_c_big = np.zeros((n, kk))
        d_c_big[:, :n_reg * k] = dm.c[:, shape.state_of[:n_reg * k]]
        d_latent = d_m @ c_big + d_c_big @ m_inv.T
        d_mu = d_mu + d_lam @ imp.latent_mean + d_latent @ lam_big.T
    return d_mu, d_sigma
