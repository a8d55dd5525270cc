"""Exact Gaussian likelihood of a diary by the Kalman filter, its gradient, and the smoother.

State-space form of the dynamic factor model (Durbin and Koopman 2012, ch. 4):
    y_t     = nu + Z alpha_t + v_t,          v_t ~ N(0, H), H diagonal
    alpha_t = T alpha_{t-1} + w_t,           w_t ~ N(0, Q)
with alpha_t = (eta_t, ..., eta_{t-q+1}, e_t), where e_t holds the unique parts of the items
with a lag-1 autocorrelation d (e_t = d e_{t-1} + u_t, Var(u_t) = Theta (1 - d^2); such an
item's unique variance moves from H into the state). T = blockdiag(companion(B_1..B_q),
diag(d)), Q = blockdiag(Psi, 0, Theta (1 - d^2)), Z = [Lambda, 0, S] (S picks the item's
unique part), H = Theta for the other items. T and Q may differ between steps: class
c = plan.step[t] uses T_c, Q_c (unequal intervals in continuous time, `state_space_gradient`).

At the first occasion of every segment the state restarts from its stationary distribution
(transition 0, state noise = the stationary covariance P_0 = blockdiag(Sigma_x, Theta_d)),
so segments are independent. An unanswered item is dropped from the measurement equation at
that step: its row of Z is set to 0, its residual to 0 and its variance to 1, which leaves
the update and the likelihood unchanged (a unit-variance zero is a constant factor 1).
The likelihood is
    log L = -1/2 sum_t [n_t log 2 pi + log det F_t + v_t' F_t^-1 v_t].

Shared covariances. The covariance recursion (P_t, F_t = Z_t P_t Z_t' + H_t, F_t^-1, the
gain) does not depend on the answers, only on which items were answered at each earlier
occasion of the segment. `filter_plan` groups the occasions whose segments share that
history (the same position in the segment, the same answered items so far) into "history
nodes", once per diary (a prefix tree of the answer patterns): a diary of complete days has
one node per prompt position, however many days it has. The nodes are made a position at a
time while at least 16 segments are that long; beyond, each longer segment continues as a
chain, one node per occasion, walked a node at a time. Each evaluation runs the covariance
recursion once per node, and reuses a node's result ("filter node") when its parent's
filter node and answered items were seen before, or when its predicted covariance equals,
bit for bit, that of an earlier node with the same answered items: the recursion has
settled into a steady state or a cycle (days joined by nights repeat the same covariances
after a few days, even with some missed prompts), and everything after it repeats exactly.
The mean recursion
    a_t|t = a_t + P_t Z_t' F_t^-1 v_t = C_t a_t-1|t-1 + W_t' (y_t - nu),   a_t+1 = T a_t|t,
with C_t = (I - W_t' Z_t) T and W_t = F_t^-1 Z_t P_t taken from the node, runs over all
segments at once, one vectorised step per position in the segment. A segment longer than
max(64, sqrt(longest segment)) occasions is cut into pieces of that length that run side by
side: each piece from a zero start, keeping the product of its C_t, then, once the value
before each piece has been carried along the segment, again from that value (a two-pass
scan of the linear recursion); one long segment of T occasions so takes O(sqrt(T))
vectorised steps. The log-likelihood is the plain filter's: sharing and reuse change no
number, and the pieces of a long segment change only the rounding (about 1e-15, relative).
The cost is linear in the number of occasions and in the number of filter nodes (a few
hundred on a long diary with missed prompts; up to one per occasion when items are skipped
so often that the covariances never settle, or when every interval differs in continuous
time: a node whose step class no other node has is made without any look-up).
The measurement update runs in the states' dimension where every unique variance is a fair
share of its item's variance (Woodbury's identity, `filtercov.states_update`: a Cholesky
factor and inverse of an m x m matrix instead of p x p), else in the items' dimension
(`filtercov.items_update`). The covariance recursion lives in models.filtercov.

Gradient. The filter is differentiated in reverse mode: the adjoints of the means run back
per occasion (in pieces like the means), those of the covariances per filter node (the sums
over each node's occasions collected by a sparse 0/1 matrix), then through the Lyapunov
equation of P_0. A reused covariance counts as one quantity: its derivative has converged
along with it (the gradient agrees with a run without reuse to about 1e-15, relative). One
gradient costs about two evaluations whatever the number of parameters.

Why not statsmodels' state-space filter: it filters one series at a time (a diary of many
short segments would take one filter run per day, each with its own Python overhead), it
has no restart to the stationary distribution inside a series, and its gradient is
numerical (one extra filter run per parameter). statsmodels' filter and smoother are the
check for this one (tests/test_kalman.py).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy import sparse

from lagwise.models.errors import EstimationError
from lagwise.models.filtercov import Covariances, covariances, sym
from lagwise.models.filterplan import FilterPlan, Lanes, filter_plan, n_active
from lagwise.models.lyapunov import companion, companion_covariance, solve_lyapunov

_LOG_2PI = float(np.log(2.0 * np.pi))
_CHUNK = 4096   # occasions per block in per-occasion products (bounds temporary memory)


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


# ----- the system matrices ------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class _System:
    z: np.ndarray        # (p, m)
    h: np.ndarray        # (p,) diagonal of H
    t: np.ndarray        # (step classes, m, m): the transition of each class of step
    q: np.ndarray        # (step classes, m, m): its state noise
    p0: np.ndarray       # (m, m) stationary covariance of the state
    k: int = 0
    kq: int = 0          # size of the companion block
    ac: np.ndarray | None = None   # items with an autocorrelated unique part (indices)
    theta: np.ndarray | None = None
    d: np.ndarray | None = None


@dataclass(frozen=True, eq=False)
class SystemGradient:
    """d loglik / d the state-space matrices (elements treated as independent): intercepts
    (p,), z (p, m), h (p,), t and q (step classes, m, m), p0 (m, m)."""

    loglik: float
    intercepts: np.ndarray
    z: np.ndarray
    h: np.ndarray
    t: np.ndarray
    q: np.ndarray
    p0: np.ndarray


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
    return _System(z=z, h=h, t=t[None], q=q[None], p0=p0, k=k, kq=kq, ac=ac, theta=theta, d=d)


# ----- per-occasion products with per-node matrices -----------------------------------------
def _apply(mats: np.ndarray, node: np.ndarray, vecs: np.ndarray, transpose: bool = False
           ) -> np.ndarray:
    """out[t] = mats[node[t]] @ vecs[t] (or mats[node[t]]' @ vecs[t]), in blocks of rows."""
    if mats.shape[0] == 1:
        return vecs @ (mats[0] if transpose else mats[0].T)
    spec = "sji,sj->si" if transpose else "sij,sj->si"
    out = np.empty((vecs.shape[0], mats.shape[2] if transpose else mats.shape[1]))
    for lo in range(0, vecs.shape[0], _CHUNK):
        sl = slice(lo, lo + _CHUNK)
        out[sl] = np.einsum(spec, mats[node[sl]], vecs[sl])
    return out


def _node_sums(pick: sparse.csc_array, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """(filter nodes, a, c): the sum over each node's occasions of x_t y_t', as the 0/1
    (filter node, occasion) matrix `pick` times the products, one column of x at a time."""
    return np.stack([pick @ (x[:, i, None] * y) for i in range(x.shape[1])], axis=1)


# ----- the mean recursions, per occasion ----------------------------------------------------
def _recursion(lanes: Lanes, mats: np.ndarray, link: np.ndarray, x: np.ndarray) -> None:
    """x_t += M_t x_t-step along every segment, in place (x holds g_t), M_t = mats[link[t]].

    The heads run as they are. Each tail runs first from a zero start, keeping its end value r
    and the product Phi of its M_t; the value c before each tail then follows along the
    segment, c' = r + Phi c, one piece at a time; then each tail runs again from its c.
    """
    _sweep(lanes.heads, lanes.step, mats, link, x)
    if not lanes.tails:
        return
    rows = lanes.tails[0]
    r, phi = x[rows], mats[link[rows]]
    for rows in lanes.tails[1:]:
        s, mt = rows.size, mats[link[rows]]
        r[:s] = np.einsum("sij,sj->si", mt, r[:s]) + x[rows]
        phi[:s] = mt @ phi[:s]
    rows = lanes.tails[0]
    c = np.empty_like(r)
    c[lanes.first] = x[rows[lanes.first] - lanes.step]
    for tail, before in lanes.links:
        c[tail] = r[before] + np.einsum("sij,sj->si", phi[before], c[before])
    x[rows] += np.einsum("sij,sj->si", mats[link[rows]], c)
    _sweep(lanes.tails, lanes.step, mats, link, x)


def _sweep(positions: tuple[np.ndarray, ...], step: int, mats: np.ndarray, link: np.ndarray,
           x: np.ndarray) -> None:
    """x_t += M_t x_t-step for the occasions at positions 1, 2, ... of pieces."""
    for rows in positions[1:]:
        if rows.size == 1:
            t = int(rows[0])
            x[t] += np.dot(mats[link[t]], x[t - step])
        else:
            x[rows] += np.einsum("sij,sj->si", mats[link[rows]], x[rows - step])

@dataclass(frozen=True, eq=False)
class _Pass:
    """One run of the filter."""

    loglik: float
    cov: Covariances
    node: np.ndarray     # (n,) filter node of each occasion
    closed: np.ndarray   # (N, m, m) C = (I - W' Zb) T: a_t|t = C a_t-1|t-1 + W' (y_t - nu)
    a_pred: np.ndarray   # (n, m) a_t
    a_filt: np.ndarray   # (n, m) a_t|t
    u: np.ndarray        # (n, p) F_t^-1 v_t


def _run(plan: FilterPlan, values, intercepts, sys: _System) -> _Pass:
    y = np.asarray(values, dtype=float)
    n, p = y.shape
    if sys.z.shape[0] != p:
        raise EstimationError(f"The data have {p} items but the model has {sys.z.shape[0]}.")
    if plan.observed.shape != y.shape or not np.array_equal(~np.isnan(y), plan.observed):
        raise EstimationError("The filter plan was built for other data.")
    observed = plan.observed
    centred = np.where(observed, y - np.asarray(intercepts, dtype=float).reshape(p), 0.0)
    cov = covariances(plan, sys)
    t, m = sys.t, sys.t.shape[1]
    node = cov.canon[plan.occasion_node]
    closed = (np.eye(m) - cov.w.transpose(0, 2, 1) @ cov.zb) @ t[cov.step]
    a_filt = _apply(cov.w, node, centred, transpose=True)   # W' (y - nu): the part without a_t
    _recursion(plan.forward, closed, node, a_filt)
    a_pred = np.zeros((n, m))
    a_pred[plan.later] = _apply(t, plan.step[plan.later], a_filt[plan.later - 1])
    r = centred - np.where(observed, a_pred @ sys.z.T, 0.0)
    u = _apply(cov.minv, node, r)
    logdet = float(cov.logdet @ np.bincount(node, minlength=cov.size))
    loglik = -0.5 * (observed.sum() * _LOG_2PI + logdet + float(np.vdot(r, u)))
    return _Pass(loglik=loglik, cov=cov, node=node, closed=closed, a_pred=a_pred, a_filt=a_filt,
                 u=u)


def _prepared(values, segment, plan: FilterPlan | None) -> FilterPlan:
    return filter_plan(values, segment) if plan is None else plan


def kalman_loglik(values: np.ndarray, segment: np.ndarray, intercepts: np.ndarray,
                  loadings: np.ndarray, unique: np.ndarray, lagged: Sequence[np.ndarray],
                  innovation: np.ndarray, unique_autocorrelation: np.ndarray | None = None,
                  plan: FilterPlan | None = None) -> float:
    """Exact log-likelihood of the whole diary (see the module docstring).

    values (T, p) with NaN for unanswered; segment (T,) ids (a new segment starts where the
    id changes); intercepts nu (p,); loadings Lambda (p, k); unique (p,) the stationary
    unique variances Theta; lagged: q matrices B_1..B_q (k, k) (empty for lag order 0);
    innovation Psi (k, k); unique_autocorrelation: (p,) lag-1 autocorrelations d of the
    unique parts (0 = none); plan: `filter_plan(values, segment)`, when already built.
    Raises EstimationError for non-stationary paths or a covariance that is not positive
    definite.
    """
    sys = _system(loadings, unique, lagged, innovation, unique_autocorrelation)
    return _run(_prepared(values, segment, plan), values, intercepts, sys).loglik


def kalman_smooth(values: np.ndarray, segment: np.ndarray, intercepts: np.ndarray,
                  loadings: np.ndarray, unique: np.ndarray, lagged: Sequence[np.ndarray],
                  innovation: np.ndarray, unique_autocorrelation: np.ndarray | None = None,
                  plan: FilterPlan | None = None) -> KalmanStates:
    """Filtered and smoothed state scores with their variances (arguments as kalman_loglik).

    Smoother (Rauch, Tung and Striebel 1965), within each segment, backwards:
        J_t = P_t|t T' P_t+1|t^+ (pseudo-inverse),  a_t|n = a_t|t + J_t (a_t+1|n - a_t+1|t),
        P_t|n = P_t|t + J_t (P_t+1|n - P_t+1|t) J_t'.
    """
    plan = _prepared(values, segment, plan)
    sys = _system(loadings, unique, lagged, innovation, unique_autocorrelation)
    run = _run(plan, values, intercepts, sys)
    cov, node = run.cov, run.node
    # T' P_t+1|t^+ per filter node; P_pred may be singular (exact items): pseudo-inverse
    tpinv = sys.t[cov.step].transpose(0, 2, 1) @ np.linalg.pinv(cov.p_pred, hermitian=True)
    a_s, p_s = run.a_filt.copy(), cov.p_filt[node]
    for b in reversed(range(int(plan.lengths[0]) - 1)):
        rows = plan.starts[:n_active(plan.lengths, b + 1)] + b
        nxt = rows + 1
        j = cov.p_filt[node[rows]] @ tpinv[node[nxt]]
        a_s[rows] += np.einsum("smn,sn->sm", j, a_s[nxt] - run.a_pred[nxt])
        ps = p_s[rows] + j @ (p_s[nxt] - cov.p_pred[node[nxt]]) @ j.transpose(0, 2, 1)
        p_s[rows] = (ps + ps.transpose(0, 2, 1)) * 0.5
    k = sys.k
    return KalmanStates(filtered_mean=run.a_filt[:, :k], filtered_cov=cov.p_filt[node][:, :k, :k],
                        smoothed_mean=a_s[:, :k], smoothed_cov=p_s[:, :k, :k], loglik=run.loglik)


def kalman_gradient(values: np.ndarray, segment: np.ndarray, intercepts: np.ndarray,
                    loadings: np.ndarray, unique: np.ndarray, lagged: Sequence[np.ndarray],
                    innovation: np.ndarray, unique_autocorrelation: np.ndarray | None = None,
                    autocorrelated: np.ndarray | None = None,
                    plan: FilterPlan | None = None) -> KalmanGradient:
    """Log-likelihood and its gradient with respect to every element of the model matrices.

    Arguments as kalman_loglik; `autocorrelated` (p,) bool marks items whose unique part is
    modelled as autocorrelated even where d is 0 (so that d's gradient exists there).
    Reverse mode: each filter step is differentiated by the matrix adjoint rules
    (F = Z P Z' + H, M = F^-1: dM = -M dF M, d log det F = tr(M dF)); the stationary
    start P_0 = A P_0 A' + Q_0 by its adjoint Lyapunov equation W = A' W A + G, which gives
    dQ_0 = W and dA = 2 W A P_0 (G the symmetrised gradient with respect to P_0).
    The adjoints of the means (per occasion) do not involve those of the covariances, so
    they run first: with C_t = (I - W_t' Z_t) T, abar_t|t = C_t+1' abar_t+1|t+1 +
    T' Z' u_t+1. Each filter node then collects the sums over its occasions, and the
    symmetric adjoint S of P_t|t runs back as S_parent += C' S C + T' E T (only symmetric
    parts reach the gradient, since every covariance is symmetric).
    """
    plan = _prepared(values, segment, plan)
    sys = _system(loadings, unique, lagged, innovation, unique_autocorrelation, autocorrelated)
    g = _system_gradient(plan, values, intercepts, sys)
    return _to_matrices(sys, g.loglik, g.z, g.h, g.intercepts, g.t[0], g.q[0], g.p0, len(lagged))


def state_space_loglik(values: np.ndarray, plan: FilterPlan, intercepts: np.ndarray,
                       z: np.ndarray, h: np.ndarray, t: np.ndarray, q: np.ndarray,
                       p0: np.ndarray) -> float:
    """Exact log-likelihood of a state-space model whose transition differs between steps:
    y_t = nu + Z alpha_t + v_t (H = diag(h)), alpha_t = T_c alpha_t-1 + w_t (Var Q_c) with c =
    plan.step[t] (the plan built with those step classes), alpha ~ N(0, P_0) at segment starts.
    t, q: (classes, m, m)."""
    return _run(plan, values, intercepts, _System(z=z, h=h, t=t, q=q, p0=p0)).loglik


def state_space_gradient(values: np.ndarray, plan: FilterPlan, intercepts: np.ndarray,
                         z: np.ndarray, h: np.ndarray, t: np.ndarray, q: np.ndarray,
                         p0: np.ndarray) -> SystemGradient:
    """The log-likelihood of `state_space_loglik` and its gradient with respect to every
    element of the state-space matrices (reverse mode, as `kalman_gradient`)."""
    return _system_gradient(plan, values, intercepts, _System(z=z, h=h, t=t, q=q, p0=p0))


def _system_gradient(plan: FilterPlan, values, intercepts, sys: _System) -> SystemGradient:
    run = _run(plan, values, intercepts, sys)
    cov, node, closed = run.cov, run.node, run.closed
    z, t = sys.z, sys.t
    observed = plan.observed
    n, p = observed.shape
    n_step, m = t.shape[:2]
    later_step = plan.step[plan.later]
    # means: a_t|t = a_t + (ZP)' u, u = M r, r = obs * (y - nu - Z a_t), a_t+1 = T a_t|t
    zu = run.u @ z
    tzu = np.zeros((n, m))
    tzu[plan.later] = _apply(t, later_step, zu[plan.later], transpose=True)
    afbar = np.zeros((n, m))                     # adjoint of a_t|t
    afbar[plan.later - 1] = tzu[plan.later]
    _recursion(plan.backward, closed.transpose(0, 2, 1), np.append(node[1:], 0), afbar)
    mu = _apply(cov.w, node, afbar)              # M ZP abar_t|t
    rb = np.where(observed, mu - run.u, 0.0)     # adjoint of r
    abar = afbar - rb @ z                        # adjoint of a_t
    nubar = -rb.sum(axis=0)
    zbar = -rb.T @ run.a_pred
    by_step = sparse.csc_array((np.ones(plan.later.size), later_step,
                                np.arange(plan.later.size + 1)), shape=(n_step, plan.later.size))
    tbar = _node_sums(by_step, abar[plan.later], run.a_filt[plan.later - 1])
    # covariances: the sums over each filter node's occasions of the adjoints of ZP and F
    size = cov.size
    pick = sparse.csc_array((np.ones(n), node, np.arange(n + 1)), shape=(size, n))
    s_zp = _node_sums(pick, run.u, afbar)
    s_f = _node_sums(pick, 0.5 * run.u - mu, run.u)
    s_f -= 0.5 * np.bincount(node, minlength=size)[:, None, None] * cov.minv
    zb, w = cov.zb, cov.w
    e = sym(zb.transpose(0, 2, 1) @ (s_f @ zb + s_zp))
    tn = t[cov.step]                             # the transition into each filter node
    d = tn.transpose(0, 2, 1) @ e @ tn
    s = np.zeros((size, m, m))                   # symmetric adjoint of P_t|t
    parent = cov.parent
    for lo, hi in reversed(cov.batches):
        if parent[lo] < 0:
            continue
        if hi - lo == 1:
            c = closed[lo]
            s[parent[lo]] += np.dot(np.dot(c.T, s[lo]), c)
            s[parent[lo]] += d[lo]
        else:
            c = closed[lo:hi]
            np.add.at(s, parent[lo:hi], c.transpose(0, 2, 1) @ s[lo:hi] @ c + d[lo:hi])
    ell = np.eye(m) - w.transpose(0, 2, 1) @ zb
    pbar = ell.transpose(0, 2, 1) @ s @ ell + e  # adjoint of P_t
    fbar = w @ s @ w.transpose(0, 2, 1) + s_f
    zpbar = s_zp - 2.0 * w @ s
    pm = cov.p_pred
    hbar = np.sum(cov.obs * np.diagonal(fbar, axis1=1, axis2=2), axis=0)
    zbbar = (fbar + fbar.transpose(0, 2, 1)) @ zb @ pm + zpbar @ pm
    zbar += np.sum(cov.obs[:, :, None] * zbbar, axis=0)
    later = parent >= 0
    pl, st = pbar[later], cov.step[later]
    np.add.at(tbar, st, 2.0 * pl @ tn[later] @ cov.p_filt[parent[later]])
    qbar = np.zeros((n_step, m, m))
    np.add.at(qbar, st, pl)
    p0bar = pbar[~later].sum(axis=0)
    return SystemGradient(loglik=run.loglik, intercepts=nubar, z=zbar, h=hbar, t=tbar, q=qbar,
                          p0=p0bar)


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
        a = sys.t[0, :kq, :kq]
        g = p0bar[:kq, :kq]
        wl = solve_lyapunov(a.T, (g + g.T) / 2.0)   # W = A' W A + G
        g_psi += wl[:k, :k]
        g_a = tbar[:kq, :kq] + 2.0 * wl @ a @ sys.p0[:kq, :kq]
        g_lagged = g_a[:k, :].reshape(k, q, k).transpose(1, 0, 2)
    return KalmanGradient(loglik=loglik, intercepts=nubar, loadings=zbar[:, :k].copy(),
                          unique=g_theta, unique_autocorrelation=g_d, lagged=g_lagged,
                          innovation=(g_psi + g_psi.T) / 2.0)
