"""Exact Gaussian likelihood of a diary by the Kalman filter, its gradient, and the smoother.

State-space form of the model of DESIGN.md section 2 (Durbin and Koopman 2012, ch. 4):
    y_t     = nu + Z alpha_t + v_t,          v_t ~ N(0, H), H diagonal
    alpha_t = T alpha_{t-1} + w_t,           w_t ~ N(0, Q)
with alpha_t = (eta_t, ..., eta_{t-q+1}, e_t), where e_t holds the unique parts of the items
with a lag-1 autocorrelation d (e_t = d e_{t-1} + u_t, Var(u_t) = Theta (1 - d^2); such an
item's unique variance moves from H into the state). T = blockdiag(companion(B_1..B_q),
diag(d)), Q = blockdiag(Psi, 0, Theta (1 - d^2)), Z = [Lambda, 0, S] (S picks the item's
unique part), H = Theta for the other items.

At the first occasion of every segment the state restarts from its stationary distribution
(transition 0, state noise = the stationary covariance P_0 = blockdiag(Sigma_x, Theta_d)),
so segments are independent. An unanswered item is dropped from the measurement equation at
that step: its row of Z is set to 0, its residual to 0 and its variance to 1, which leaves
the update and the likelihood unchanged (a unit-variance zero is a constant factor 1).

Occasions at the same position within their segments are filtered together (numpy arrays
stacked over segments), so a diary of D days x B prompts takes B vectorised steps; the cost
is linear in the number of occasions. The likelihood is
    log L = -1/2 sum_t [n_t log 2 pi + log det F_t + v_t' F_t^-1 v_t].
The gradient is the filter differentiated in reverse mode (adjoint recursion through the
update and prediction steps, then through the Lyapunov equation of P_0), so one gradient
costs a few evaluations whatever the number of parameters.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from models.errors import EstimationError
from models.lyapunov import companion, companion_covariance, solve_lyapunov

_LOG_2PI = float(np.log(2.0 * np.pi))


@dataclass(frozen=True, eq=False)
class KalmanStates:
    """Filtered and smoothed state scores per occasion (states only, not lagged copies).

    filtered_mean (T, k): E[eta_t | answers of the segment up to t];
    filtered_cov (T, k, k) its variance; smoothed_mean / smoothed_cov condition on the whole
    segment (Rauch-Tung-Striebel smoother). State scores are deviations from the state's
    mean 0 (the levels sit in the intercepts). loglik is the exact log-likelihood.
    """

    filtered_mean: np.ndarray
    filtered_cov: np.ndarray
    smoothed_mean: np.ndarray
    smoothed_cov: np.ndarray
    loglik: float


@dataclass(frozen=True, eq=False)
class KalmanGradient:
    """d loglik / d each element of the model matrices (elements treated as independent).

    intercepts (p,), loadings (p, k), unique (p,), unique_autocorrelation (p,) (0 for items
    whose unique part is not modelled as autocorrelated), lagged (q, k, k), innovation (k, k),
    symmetric: moving Psi_ij and Psi_ji together by e changes loglik by (g_ij + g_ji) e.
    """

    loglik: float
    intercepts: np.ndarray
    loadings: np.ndarray
    unique: np.ndarray
    unique_autocorrelation: np.ndarray
    lagged: np.ndarray
    innovation: np.ndarray


@dataclass(frozen=True, eq=False)
class _System:
    z: np.ndarray        # (p, m)
    h: np.ndarray        # (p,) diagonal of H
    t: np.ndarray        # (m, m)
    q: np.ndarray        # (m, m)
    p0: np.ndarray       # (m, m) stationary covariance of the state
    k: int
    kq: int              # size of the companion block
    ac: np.ndarray       # items with an autocorrelated unique part (indices)
    theta: np.ndarray
    d: np.ndarray


def _system(loadings, unique, lagged, innovation, unique_autocorrelation,
            autocorrelated=None) -> _System:
    lam = np.atleast_2d(np.asarray(loadings, dtype=float))
    p, k = lam.shape
    theta = np.asarray(unique, dtype=float).reshape(p)
    psi = np.atleast_2d(np.asarray(innovation, dtype=float))
    blocks = [np.atleast_2d(np.asarray(b, dtype=float)) for b in lagged]
    d = (np.zeros(p) if unique_autocorrelation is None
         else np.asarray(unique_autocorrelation, dtype=float).reshape(p))
    if np.any(np.abs(d) >= 1.0):
        raise EstimationError("A unique autocorrelation reached 1 in absolute value.")
    sigma_x = companion_covariance(blocks, psi)  # Psi itself at lag order 0
    a = companion(blocks) if blocks else np.zeros((k, k))  # lag order 0: independent occasions
    kq = a.shape[0]
    modelled = d != 0.0
    if autocorrelated is not None:
        modelled |= np.asarray(autocorrelated, dtype=bool).reshape(p)
    ac = np.flatnonzero(modelled)
    m = kq + ac.size
    z = np.zeros((p, m))
    z[:, :k] = lam
    z[ac, kq + np.arange(ac.size)] = 1.0
    h = theta.copy()
    h[ac] = 0.0
    t = np.zeros((m, m))
    t[:kq, :kq] = a
    t[kq:, kq:] = np.diag(d[ac])
    q = np.zeros((m, m))
    q[:k, :k] = psi
    q[kq:, kq:] = np.diag(theta[ac] * (1.0 - d[ac] ** 2))
    p0 = np.zeros((m, m))
    p0[:kq, :kq] = sigma_x
    p0[kq:, kq:] = np.diag(theta[ac])
    return _System(z=z, h=h, t=t, q=q, p0=p0, k=k, kq=kq, ac=ac, theta=theta, d=d)


def _layout(segment: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Segments ordered by decreasing length: (start, length) arrays.

    A segment is a run of consecutive occasions with the same id.
    """
    seg = np.asarray(segment).reshape(-1)
    if seg.size != n:
        raise EstimationError(f"{n} occasions but {seg.size} segment labels.")
    if n == 0:
        raise EstimationError("The diary has no occasions.")
    starts = np.flatnonzero(np.r_[True, seg[1:] != seg[:-1]])
    lengths = np.diff(np.r_[starts, n])
    order = np.argsort(-lengths, kind="stable")
    return starts[order], lengths[order]


def _n_active(lengths: np.ndarray, b: int) -> int:
    """Number of segments longer than b (lengths sorted in decreasing order)."""
    return int(np.searchsorted(-lengths, -b, side="left"))


def _filter(values, segment, intercepts, sys: _System, store: str | None):
    """Run the filter; `store` None, "smooth" or "gradient" keeps per-occasion moments."""
    y = np.asarray(values, dtype=float)
    n, p = y.shape
    if y.ndim != 2 or sys.z.shape[0] != p:
        raise EstimationError(f"The data have {p} items but the model has {sys.z.shape[0]}.")
    observed = ~np.isnan(y)
    centred = np.where(observed, y - np.asarray(intercepts, dtype=float).reshape(p), 0.0)
    starts, lengths = _layout(segment, n)
    m = sys.t.shape[0]
    keep: dict[str, np.ndarray] = {}
    if store is not None:
        keep = {"a_pred": np.empty((n, m)), "p_pred": np.empty((n, m, m)),
                "a_filt": np.empty((n, m)), "p_filt": np.empty((n, m, m))}
    if store == "gradient":
        keep.update(minv=np.empty((n, p, p)), u=np.empty((n, p)), w=np.empty((n, p, m)),
                    zp=np.empty((n, p, m)))
    diag = np.arange(p)
    loglik = 0.0
    a = np.zeros((starts.size, m))
    pm = np.broadcast_to(sys.p0, (starts.size, m, m))
    for b in range(int(lengths[0])):
        n_act = _n_active(lengths, b)
        rows = starts[:n_act] + b
        a, pm = a[:n_act], pm[:n_act]
        if b > 0:
            a = a @ sys.t.T
            pm = sys.t @ pm @ sys.t.T + sys.q
        obs = observed[rows]
        zb = sys.z * obs[:, :, None]                               # (S, p, m)
        resid = np.where(obs, centred[rows] - a @ sys.z.T, 0.0)    # (S, p)
        zp = zb @ pm                                                # (S, p, m)
        f = zp @ zb.transpose(0, 2, 1)
        f[:, diag, diag] += np.where(obs, sys.h, 1.0)
        try:
            chol = np.linalg.cholesky(f)
        except np.linalg.LinAlgError:
            raise EstimationError("The predicted covariance of the answers is not positive "
                                  "definite at some occasion.") from None
        if store == "gradient":
            minv = np.linalg.inv(f)
            u = np.einsum("spq,sq->sp", minv, resid)
            w = minv @ zp
            keep["minv"][rows], keep["u"][rows], keep["w"][rows], keep["zp"][rows] = minv, u, w, zp
        else:
            sol = np.linalg.solve(f, np.concatenate([resid[:, :, None], zp], axis=2))
            u, w = sol[:, :, 0], sol[:, :, 1:]
        logdet = 2.0 * np.log(np.diagonal(chol, axis1=1, axis2=2)).sum()
        loglik -= 0.5 * (obs.sum() * _LOG_2PI + logdet + np.einsum("sp,sp->", resid, u))
        if store is not None:
            keep["a_pred"][rows], keep["p_pred"][rows] = a, pm
        a = a + np.einsum("spm,sp->sm", zp, u)
        pm = pm - zp.transpose(0, 2, 1) @ w
        pm = (pm + pm.transpose(0, 2, 1)) / 2.0
        if store is not None:
            keep["a_filt"][rows], keep["p_filt"][rows] = a, pm
    return float(loglik), keep, starts, lengths, observed


def kalman_loglik(values: np.ndarray, segment: np.ndarray, intercepts: np.ndarray,
                  loadings: np.ndarray, unique: np.ndarray, lagged: Sequence[np.ndarray],
                  innovation: np.ndarray, unique_autocorrelation: np.ndarray | None = None
                  ) -> float:
    """Exact log-likelihood of the whole diary (see the module docstring).

    values (T, p) with NaN for unanswered; segment (T,) ids (a new segment starts where the
    id changes); intercepts nu (p,); loadings Lambda (p, k); unique (p,) the stationary
    unique variances Theta; lagged: q matrices B_1..B_q (k, k) (empty for lag order 0);
    innovation Psi (k, k); unique_autocorrelation: (p,) lag-1 autocorrelations d of the
    unique parts (0 = none). Raises EstimationError for non-stationary paths or a
    covariance that is not positive definite.
    """
    sys = _system(loadings, unique, lagged, innovation, unique_autocorrelation)
    return _filter(values, segment, intercepts, sys, None)[0]


def kalman_smooth(values: np.ndarray, segment: np.ndarray, intercepts: np.ndarray,
                  loadings: np.ndarray, unique: np.ndarray, lagged: Sequence[np.ndarray],
                  innovation: np.ndarray, unique_autocorrelation: np.ndarray | None = None
                  ) -> KalmanStates:
    """Filtered and smoothed state scores with their variances (arguments as kalman_loglik).

    Smoother (Rauch, Tung and Striebel 1965), within each segment, backwards:
        J_t = P_t|t T' P_t+1|t^+ (pseudo-inverse),  a_t|n = a_t|t + J_t (a_t+1|n - a_t+1|t),
        P_t|n = P_t|t + J_t (P_t+1|n - P_t+1|t) J_t'.
    """
    sys = _system(loadings, unique, lagged, innovation, unique_autocorrelation)
    loglik, st, starts, lengths, _ = _filter(values, segment, intercepts, sys, "smooth")
    a_s, p_s = st["a_filt"].copy(), st["p_filt"].copy()
    for b in range(int(lengths[0]) - 2, -1, -1):
        rows = starts[:_n_active(lengths, b + 1)] + b
        pf, pp = st["p_filt"][rows], st["p_pred"][rows + 1]
        rhs = (pf @ sys.t.T).transpose(0, 2, 1)                     # J' = P_pred^+ T P_f
        jt = np.linalg.pinv(pp, hermitian=True) @ rhs  # P_pred may be singular (exact items)
        j = jt.transpose(0, 2, 1)
        a_s[rows] = st["a_filt"][rows] + np.einsum(
            "smn,sn->sm", j, a_s[rows + 1] - st["a_pred"][rows + 1])
        ps = pf + j @ (p_s[rows + 1] - pp) @ jt
        p_s[rows] = (ps + ps.transpose(0, 2, 1)) / 2.0
    k = sys.k
    return KalmanStates(filtered_mean=st["a_filt"][:, :k], filtered_cov=st["p_filt"][:, :k, :k],
                        smoothed_mean=a_s[:, :k], smoothed_cov=p_s[:, :k, :k], loglik=loglik)


def kalman_gradient(values: np.ndarray, segment: np.ndarray, intercepts: np.ndarray,
                    loadings: np.ndarray, unique: np.ndarray, lagged: Sequence[np.ndarray],
                    innovation: np.ndarray, unique_autocorrelation: np.ndarray | None = None,
                    autocorrelated: np.ndarray | None = None) -> KalmanGradient:
    """Log-likelihood and its gradient with respect to every element of the model matrices.

    Arguments as kalman_loglik; `autocorrelated` (p,) bool marks items whose unique part is
    modelled as autocorrelated even where d is 0 (so that d's gradient exists there).
    Reverse mode: each filter step is differentiated by the matrix adjoint rules
    (F = Z P Z' + H, M = F^-1: dM = -M dF M, d log det F = tr(M dF)); the stationary
    start P_0 = A P_0 A' + Q_0 by its adjoint Lyapunov equation W = A' W A + G, which gives
    dQ_0 = W and dA = 2 W A P_0 (G the symmetrised gradient with respect to P_0).
    """
    sys = _system(loadings, unique, lagged, innovation, unique_autocorrelation, autocorrelated)
    loglik, st, starts, lengths, observed = _filter(values, segment, intercepts, sys, "gradient")
    z, t = sys.z, sys.t
    n, p = observed.shape
    m = t.shape[0]
    zbar, tbar, qbar, p0bar = np.zeros((p, m)), np.zeros((m, m)), np.zeros((m, m)), np.zeros((m, m))
    hbar, nubar = np.zeros(p), np.zeros(p)
    abar_f = np.zeros((starts.size, m))
    pbar_f = np.zeros((starts.size, m, m))
    for b in range(int(lengths[0]) - 1, -1, -1):
        n_act = _n_active(lengths, b)
        rows = starts[:n_act] + b
        af_bar, pf_bar = abar_f[:n_act], pbar_f[:n_act]
        obs = observed[rows]
        a, pm = st["a_pred"][rows], st["p_pred"][rows]
        minv, u, w, zp = st["minv"][rows], st["u"][rows], st["w"][rows], st["zp"][rows]
        zb = z * obs[:, :, None]
        # a_f = a + ZP' u and P_f = P - ZP' M ZP
        abar = af_bar.copy()
        ubar = np.einsum("spm,sm->sp", zp, af_bar)
        zpbar = u[:, :, None] * af_bar[:, None, :] - w @ (pf_bar + pf_bar.transpose(0, 2, 1))
        pbar = pf_bar.copy()
        fbar = w @ pf_bar @ w.transpose(0, 2, 1)
        # u = M r, and the likelihood term -1/2 (log det F + r' M r)
        mu = np.einsum("spq,sq->sp", minv, ubar)
        rbar = mu - u
        fbar += -mu[:, :, None] * u[:, None, :] - 0.5 * minv + 0.5 * u[:, :, None] * u[:, None, :]
        # F = Zb P Zb' + Hb and ZP = Zb P
        hbar += np.sum(obs * np.diagonal(fbar, axis1=1, axis2=2), axis=0)
        zbbar = (fbar @ zb @ pm.transpose(0, 2, 1) + fbar.transpose(0, 2, 1) @ zb @ pm
                 + zpbar @ pm.transpose(0, 2, 1))
        pbar += zb.transpose(0, 2, 1) @ (fbar @ zb + zpbar)
        # r = obs * (y - nu - Z a)
        rb = obs * rbar
        nubar -= rb.sum(axis=0)
        zbar += np.sum(obs[:, :, None] * zbbar, axis=0) - rb.T @ a
        abar -= rb @ z
        if b > 0:  # a = T a_f(prev), P = T P_f(prev) T' + Q
            af_prev, pf_prev = st["a_filt"][rows - 1], st["p_filt"][rows - 1]
            abar_f[:n_act] = abar @ t
            pbar_f[:n_act] = t.T @ pbar @ t
            tbar += abar.T @ af_prev + np.sum(
                pbar @ t @ pf_prev.transpose(0, 2, 1) + pbar.transpose(0, 2, 1) @ t @ pf_prev, axis=0)
            qbar += pbar.sum(axis=0)
        else:      # segment start: P = P_0
            p0bar += pbar.sum(axis=0)
    return _to_matrices(sys, loglik, zbar, hbar, nubar, tbar, qbar, p0bar, len(lagged))


def _to_matrices(sys: _System, loglik, zbar, hbar, nubar, tbar, qbar, p0bar, q: int
                 ) -> KalmanGradient:
    """Chain the system-matrix gradients back to nu, Lambda, Theta, d, B_l and Psi."""
    k, kq, ac, theta, d = sys.k, sys.kq, sys.ac, sys.theta, sys.d
    p = theta.size
    g_theta = np.where(np.isin(np.arange(p), ac), 0.0, hbar)
    g_d = np.zeros(p)
    if ac.size:
        blk = slice(kq, None)
        g_theta[ac] += np.diag(p0bar[blk, blk]) + np.diag(qbar[blk, blk]) * (1.0 - d[ac] ** 2)
        g_d[ac] = np.diag(tbar[blk, blk]) - 2.0 * theta[ac] * d[ac] * np.diag(qbar[blk, blk])
    g_psi = qbar[:k, :k].copy()
    g_lagged = np.zeros((q, k, k))
    if q == 0:
        g_psi += p0bar[:k, :k]
    else:
        a = sys.t[:kq, :kq]
        g = p0bar[:kq, :kq]
        wl = solve_lyapunov(a.T, (g + g.T) / 2.0)   # W = A' W A + G
        g_psi += wl[:k, :k]
        g_a = tbar[:kq, :kq] + 2.0 * wl @ a @ sys.p0[:kq, :kq]
        g_lagged = g_a[:k, :].reshape(k, q, k).transpose(1, 0, 2)
    return KalmanGradient(loglik=loglik, intercepts=nubar, loadings=zbar[:, :k].copy(),
                          unique=g_theta, unique_autocorrelation=g_d, lagged=g_lagged,
                          innovation=(g_psi + g_psi.T) / 2.0)
