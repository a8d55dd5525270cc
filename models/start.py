"""Start values: a one-factor principal-axis guess per state, latent autocovariances by least
squares through the loadings, and masked Yule-Walker equations for the lagged paths.

Phi_h ~= L+ (S_h - [h = 0] Theta) L+',  L+ = (Lambda' Lambda)^-1 Lambda'  (S_h: item lag-h
cross-covariance within segments); row i of [B_1 .. B_q] restricted to its free columns J solves
[B]_iJ V_JJ = C_iJ with C = (Phi_1, .., Phi_q) and V the block-Toeplitz latent covariance of
(eta_{t-1}, .., eta_{t-q}) (Yule-Walker; Lutkepohl 2005, section 3.3.1).
"""

from __future__ import annotations

import numpy as np

from lagwise.models.itemcheck import answered_moments
from lagwise.models.kinds import Kind
from lagwise.models.lyapunov import companion_covariance, spectral_radius
from lagwise.models.parameters import Matrices, ParameterLayout


def pairwise_cross_cov(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Cov(x_a, y_b) over rows where both are observed (NaN-aware)."""
    mx, my = ~np.isnan(x), ~np.isnan(y)
    x0, y0 = np.where(mx, x, 0.0), np.where(my, y, 0.0)
    n = mx.T.astype(float) @ my
    n = np.maximum(n, 1.0)
    sxy, sx, sy = x0.T @ y0, x0.T @ my, mx.T.astype(float) @ y0
    return sxy / n - sx * sy / n ** 2


def _clip_pd(a: np.ndarray, floor: np.ndarray) -> np.ndarray:
    a = 0.5 * (a + a.T)
    w, v = np.linalg.eigh(a)
    w = np.maximum(w, 0.05 * max(float(np.mean(floor)), 1e-8))
    return (v * w) @ v.T


def start_matrices(layout: ParameterLayout, data: np.ndarray, depth: int) -> Matrices:
    """Start values from window data (n_windows, (depth+1) p) for the layout's model."""
    spec, p, k, q = layout.spec, layout.p, layout.k, layout.q
    blocks = [data[:, j * p:(j + 1) * p] for j in range(depth + 1)]
    s0 = pairwise_cross_cov(blocks[0], blocks[0])
    s0 = 0.5 * (s0 + s0.T)
    var = np.maximum(np.diag(s0), 1e-8)
    nu = answered_moments(blocks[0])[0]
    mask = spec.loading_mask()
    fixed_theta = {e.index[0]: value for e, value in zip(layout.entries, layout.fixed_values)
                   if e.kind == Kind.UNIQUE and not e.free}
    lam = np.zeros((p, k))
    phi_diag = np.ones(k)
    for j, s in enumerate(spec.states):
        idx = [layout.items.index(it) for it in s.items]
        if len(idx) == 1:
            i = idx[0]
            l_vec = np.array([np.sqrt(max(var[i] - fixed_theta.get(i, 0.0), 0.05 * var[i]))])
        else:
            w, v = np.linalg.eigh(s0[np.ix_(idx, idx)])
            l_vec = np.sqrt(max(w[-1], 1e-8)) * v[:, -1]
        m_pos = idx.index(layout.items.index(s.marker_item)) if spec.identification == "marker" else 0
        if l_vec[m_pos] < 0:
            l_vec = -l_vec
        if abs(l_vec[m_pos]) < 1e-8:
            l_vec[m_pos] = np.sqrt(var[idx[m_pos]]) * 0.5
        if spec.identification == "marker":
            lam[idx, j] = l_vec / l_vec[m_pos]
            phi_diag[j] = l_vec[m_pos] ** 2
        else:
            lam[idx, j] = l_vec
    theta = var - (lam ** 2 * phi_diag).sum(axis=1)
    theta = np.clip(theta, 0.1 * var, 0.9 * var)
    for i, v in fixed_theta.items():
        theta[i] = v
    lam = np.where(mask, lam, 0.0)
    pinv = np.linalg.pinv(lam)

    def latent(h: int) -> np.ndarray:
        if h == 0:
            return _clip_pd(pinv @ (s0 - np.diag(theta)) @ pinv.T, phi_diag)
        return pinv @ pairwise_cross_cov(blocks[0], blocks[h]) @ pinv.T

    phi = [latent(h) for h in range(min(q, depth) + 1)]
    lagged = np.zeros((q, k, k))
    psi = phi[0].copy()
    if q > 0:
        # V = Cov((eta_{t-1}, ..., eta_{t-q})): block (a, b) = Phi_{b-a} (transposed below)
        v_big = np.zeros((q * k, q * k))
        for a in range(q):
            for b in range(q):
                h = b - a
                v_big[a * k:(a + 1) * k, b * k:(b + 1) * k] = phi[h] if h >= 0 else phi[-h].T
        c_big = np.hstack(phi[1:q + 1])
        free = np.hstack([spec.path_mask(lag) for lag in range(1, q + 1)])
        b_big = np.zeros((k, q * k))
        for i in range(k):
            cols = np.flatnonzero(free[i])
            if cols.size:
                b_big[i, cols] = np.linalg.lstsq(v_big[np.ix_(cols, cols)], c_big[i, cols], rcond=None)[0]
        lagged = np.stack([b_big[:, l * k:(l + 1) * k] for l in range(q)])
        while spectral_radius(list(lagged)) > 0.9:
            lagged *= 0.8
        b_big = np.hstack(list(lagged))
        psi = phi[0] - c_big @ b_big.T - b_big @ c_big.T + b_big @ v_big @ b_big.T
    psi = _clip_pd(psi, np.diag(phi[0]))
    if spec.innovations != "free":
        psi = np.diag(np.diag(psi)) if spec.innovations == "independent" else psi
    if spec.identification == "variance":
        s = np.sqrt(np.diag(psi))
        lam = lam * s[None, :]
        lagged = lagged * s[None, None, :] / s[None, :, None]
        psi = psi / np.outer(s, s)
    m = Matrices(nu=nu, lam=lam, theta=theta, d=np.zeros(p), lagged=lagged, psi=psi)
    if spec.innovations == "partial":
        kinv = np.linalg.inv(psi)
        dd = np.sqrt(np.diag(kinv))
        rho_p = -kinv / np.outer(dd, dd)
        zeros = {frozenset(z) for z in spec.partial_zeros}
        names = layout.states
        for i in range(k):
            for j in range(k):
                if i != j and frozenset((names[i], names[j])) in zeros:
                    rho_p[i, j] = 0.0
        rmat = -np.clip(rho_p, -0.95, 0.95)
        np.fill_diagonal(rmat, 1.0)
        m.pv = np.diag(psi).copy()
        m.rmat = rmat
    if layout.free_first_copies:
        m.phif = companion_covariance(list(lagged), psi)
        m.c = np.zeros(k)
    # keep only what the layout frees, then rebuild the dependent matrices consistently
    return layout.unpack(layout.pack(m))
