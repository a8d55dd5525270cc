"""The covariance recursion of the Kalman filter (models.kalman), once per filter node.

The predicted and filtered covariances, the gain and F^-1 do not depend on the answers, only
on which items were answered at each earlier occasion of a segment, so they are computed per
node of the filter plan (models.filterplan), a position at a time for nodes made side by side
and a node at a time along chains; a node reuses an earlier one when it is reached the same
way, or when its predicted covariance equals an earlier one's bit for bit (see models.kalman).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
from scipy.linalg import lapack

from lagwise.models.errors import EstimationError
from lagwise.models.filterplan import FilterPlan

if TYPE_CHECKING:
    from lagwise.models.kalman import _System


def sym(x: np.ndarray) -> np.ndarray:
    """(x + x') / 2 for a stack of square matrices."""
    return (x + x.transpose(0, 2, 1)) * 0.5


@dataclass(frozen=True, eq=False)
class Covariances:
    """The covariance recursion on the distinct nodes ("filter nodes").

    canon (history nodes,) maps each history node to its filter node; a filter node is
    created from its parent's filtered covariance (parent -1: P_0) by a step of class `step`
    and the answered items obs; batches lists (lo, hi) of filter nodes created together, in
    creation order.
    """

    canon: np.ndarray
    parent: np.ndarray
    step: np.ndarray     # (N,) class of the step into each filter node
    obs: np.ndarray
    batches: list[tuple[int, int]]
    p_pred: np.ndarray   # (N, m, m) P_t
    p_filt: np.ndarray   # (N, m, m) P_t|t
    minv: np.ndarray     # (N, p, p) F_t^-1
    w: np.ndarray        # (N, p, m) F_t^-1 Z_t P_t
    zb: np.ndarray       # (N, p, m) Z_t (rows of unanswered items 0)
    logdet: np.ndarray   # (N,) log det F_t

    @property
    def size(self) -> int:
        return int(self.parent.size)


NOT_PD = "The predicted covariance of the answers is not positive definite at some occasion."
# the information form serves when every item's unique variance is at least this share of
# its variance (its rounding error grows like variance / unique variance times 1e-16)
NOISE_FLOOR = 1e-6


def items_update(zb: np.ndarray, hb: np.ndarray, pm: np.ndarray) -> tuple[np.ndarray, ...]:
    """The measurement update of a batch of nodes: with F = Zb P Zb' + diag(hb),
    (P_t|t = P - (Zb P)' F^-1 Zb P, W = F^-1 Zb P, F^-1, log det F)."""
    p = zb.shape[1]
    zpb = zb @ pm
    f = zpb @ zb.transpose(0, 2, 1)
    f[:, np.arange(p), np.arange(p)] += hb
    try:
        chol = np.linalg.cholesky(f)
    except np.linalg.LinAlgError:
        raise EstimationError(NOT_PD) from None
    mi = np.linalg.inv(f)
    wb = mi @ zpb
    return (sym(pm - zpb.transpose(0, 2, 1) @ wb), wb, mi,
            2.0 * np.log(np.diagonal(chol, axis1=1, axis2=2)).sum(axis=1))


def states_update(zb: np.ndarray, hb: np.ndarray, pm: np.ndarray
                        ) -> tuple[np.ndarray, ...] | None:
    """The same update in the state's dimension (hb > 0; None when a P is not positive
    definite): with P = C C', G = Zb C, D = diag(hb)^-1 and K = I + G' D G,
        P_t|t = C K^-1 C',  W = D Zb P_t|t,  F^-1 = D - D G K^-1 G' D,
        log det F = sum log hb + log det K
    (Woodbury's identity; Durbin and Koopman 2012, sec. 6.5, on filtering in the state's
    dimension when it is smaller than the number of items). K >= I is well conditioned."""
    try:
        c = np.linalg.cholesky(pm)
    except np.linalg.LinAlgError:
        return None
    g = zb @ c
    dg = g / hb[:, :, None]
    k = g.transpose(0, 2, 1) @ dg
    k[:, np.arange(k.shape[1]), np.arange(k.shape[1])] += 1.0
    kinv = np.linalg.inv(k)
    pf = c @ kinv @ c.transpose(0, 2, 1)
    mi = -(dg @ kinv @ dg.transpose(0, 2, 1))
    mi[:, np.arange(hb.shape[1]), np.arange(hb.shape[1])] += 1.0 / hb
    logdet = np.log(hb).sum(axis=1) + 2.0 * np.log(
        np.diagonal(np.linalg.cholesky(k), axis1=1, axis2=2)).sum(axis=1)
    return sym(pf), (zb / hb[:, :, None]) @ pf, mi, logdet


def covariances(plan: FilterPlan, sys: "_System") -> Covariances:
    """Run the covariance recursion over the history nodes of the plan: a level at a time
    (vectorised), then along the chains a node at a time.

    A history node whose (parent's filter node, answered items) was seen before reuses that
    filter node; so does one whose predicted covariance equals, bit for bit, that of an
    earlier filter node with the same answered items (the recursion has reached a steady
    state or cycle: everything after it repeats exactly).
    """
    z, t, q = sys.z, sys.t, sys.q
    p, m = z.shape
    cap = plan.n_nodes
    canon = [0] * cap
    parent, pattern = np.empty(cap, dtype=np.int64), np.empty(cap, dtype=np.int64)
    step = np.zeros(cap, dtype=np.int64)
    p_pred, p_filt = np.empty((cap, m, m)), np.empty((cap, m, m))
    minv, w = np.empty((cap, p, p)), np.empty((cap, p, m))
    logdet = np.empty(cap)
    zb_pat = z * plan.patterns[:, :, None]
    hb_pat = np.where(plan.patterns, sys.h, 1.0)
    noisy = bool(np.all(sys.h > NOISE_FLOOR * (np.einsum("ij,jk,ik->i", z, sys.p0, z) + sys.h)))
    node_pattern, node_parent = plan.node_pattern.tolist(), plan.node_parent.tolist()
    node_step = plan.node_step.tolist()
    edges: dict[tuple[int, int, int], int] = {}
    seen: dict[tuple[int, int, bytes], int] = {}
    batches = []
    size = 0
    rhs = np.zeros((p, m + p))
    rhs[:, m:] = np.eye(p)

    def one(cp: int, pat: int, st: int, lone: bool) -> int:
        """The filter node after filter node cp by a step of class st with the answered
        items pat (plain LAPACK: numpy's overhead would dominate for a single node); a lone
        step class (no other node has it) is never looked up or remembered."""
        nonlocal size
        pm = np.dot(np.dot(t[st], p_filt[cp]), t[st].T) + q[st]
        if not lone:
            hit = edges[(cp, pat, st)] = seen.setdefault((pat, st, pm.tobytes()), size)
            if hit < size:
                return hit
        zb, zpb = zb_pat[pat], np.dot(zb_pat[pat], pm)
        f = np.dot(zpb, zb.T)
        f.flat[::p + 1] += hb_pat[pat]
        rhs[:, :m] = zpb
        chol, x, info = lapack.dposv(f, rhs)
        if info != 0:
            raise EstimationError(NOT_PD)
        pf = pm - np.dot(zpb.T, x[:, :m])
        p_pred[size], p_filt[size] = pm, (pf + pf.T) * 0.5
        w[size], minv[size] = x[:, :m], x[:, m:]
        logdet[size] = 2.0 * np.log(np.diagonal(chol)).sum()
        parent[size], pattern[size], step[size] = cp, pat, st
        batches.append((size, size + 1))
        size += 1
        return size - 1

    for b, (first, last) in enumerate(plan.levels):
        lone = np.flatnonzero(plan.lone[first:last]) + first if b else np.empty(0, np.int64)
        shared = (np.flatnonzero(~plan.lone[first:last]) + first).tolist() if lone.size \
            else range(first, last)
        fresh, fresh_parent = [], []
        for j in shared:
            cp = canon[node_parent[j]] if b else -1
            hit = edges.get((cp, node_pattern[j], node_step[j]))
            if hit is None:
                fresh.append(j)
                fresh_parent.append(cp)
            else:
                canon[j] = hit
        if not fresh and not lone.size:
            continue
        if b == 0:
            pms = np.broadcast_to(sys.p0, (len(fresh), m, m))
        else:   # the parents sit on the previous level
            before = plan.levels[b - 1][0]
            lone_parent = np.array(canon[before:first])[plan.node_parent[lone] - before]
            new = np.r_[np.array(fresh, dtype=np.int64), lone]
            ts = t[plan.node_step[new]]
            pms = (ts @ p_filt[np.r_[np.array(fresh_parent, dtype=np.int64), lone_parent]]
                   @ ts.transpose(0, 2, 1) + q[plan.node_step[new]])
        lo = size
        for j, cp, pm in zip(fresh, fresh_parent, pms):
            pat, st = node_pattern[j], node_step[j]
            hit = seen.setdefault((pat, st, pm.tobytes()), size)
            if hit == size:
                p_pred[size], parent[size], pattern[size], step[size] = pm, cp, pat, st
                size += 1
            canon[j] = edges[(cp, pat, st)] = hit
        if lone.size:   # a node of a lone step class is always a filter node of its own
            hi = size + lone.size
            p_pred[size:hi], parent[size:hi] = pms[len(fresh):], lone_parent
            pattern[size:hi], step[size:hi] = plan.node_pattern[lone], plan.node_step[lone]
            if lone.size == last - first:
                canon[first:last] = range(size, hi)
            else:
                for j, c in zip(lone.tolist(), range(size, hi)):
                    canon[j] = c
            size = hi
        if size == lo:
            continue
        hi = size
        batches.append((lo, hi))
        zb, hb = zb_pat[pattern[lo:hi]], hb_pat[pattern[lo:hi]]
        update = states_update(zb, hb, p_pred[lo:hi]) if noisy else None
        if update is None:
            update = items_update(zb, hb, p_pred[lo:hi])
        p_filt[lo:hi], w[lo:hi], minv[lo:hi], logdet[lo:hi] = update
    node_lone = plan.lone.tolist()
    for j in range(plan.levels[-1][1], cap):
        cp, pat, st = canon[node_parent[j]], node_pattern[j], node_step[j]
        hit = None if node_lone[j] else edges.get((cp, pat, st))
        canon[j] = one(cp, pat, st, node_lone[j]) if hit is None else hit
    if not np.all(np.isfinite(logdet[:size])):
        raise EstimationError(NOT_PD)
    pattern = pattern[:size]
    return Covariances(canon=np.array(canon, dtype=np.int64), parent=parent[:size],
                       step=step[:size], obs=plan.patterns[pattern], batches=batches,
                       p_pred=p_pred[:size], p_filt=p_filt[:size], minv=minv[:size],
                       w=w[:size], zb=zb_pat[pattern], logdet=logdet[:size])
