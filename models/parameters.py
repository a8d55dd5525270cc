"""The parameter table of a specification: one declaration, from which the flat vector of
free values, the model matrices, readable names and bounds are all derived.

Blocks (usual symbols): nu (intercepts), Lambda (loadings), Theta (unique variances),
d (lag-1 autocorrelation of unique parts), B_l (lagged paths), Psi (innovations) — as free
covariances, or (partial form) innovation variances v and partial correlations rho with
Psi = D C D, C = R^-1, R = I - rho (off-diagonal), D = diag(sqrt(v / diag C)) — and, for the
first-copy-free estimator, Phi_F (free covariance of the oldest q copies of the states) and c
(latent intercepts of the regressed copies; the oldest copies have latent mean 0), so that its
window means are not tied to stationarity either.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from lagwise.models.spec import ModelSpec

VARIANCE_FLOOR = 1e-8


@dataclass(frozen=True)
class Entry:
    """One parameter: its reported kind and direction, its matrix slot, free or fixed."""

    kind: str
    from_: str
    to: str
    lag: int
    block: str
    index: tuple[int, ...]
    free: bool
    value: float = 0.0  # the fixed value (ignored when free)

    @property
    def is_variance(self) -> bool:
        return (self.block in ("theta", "pv")
                or (self.block in ("psi", "phif") and self.index[0] == self.index[1]))


@dataclass
class Matrices:
    """Model matrices in the spec's item/state order."""

    nu: np.ndarray      # (p,)
    lam: np.ndarray     # (p, k)
    theta: np.ndarray   # (p,)
    d: np.ndarray       # (p,)
    lagged: np.ndarray  # (q, k, k)
    psi: np.ndarray     # (k, k)
    phif: np.ndarray | None = None  # (qk, qk), first-copy-free only
    c: np.ndarray | None = None     # (k,), first-copy-free only: latent intercepts
    pv: np.ndarray | None = None    # partial form: innovation variances
    rmat: np.ndarray | None = None  # partial form: R = I - rho


@dataclass
class Gradients:
    """d loglik / d matrix for each block (same shapes as Matrices)."""

    nu: np.ndarray
    lam: np.ndarray
    theta: np.ndarray
    d: np.ndarray
    lagged: np.ndarray
    psi: np.ndarray
    phif: np.ndarray | None = None
    c: np.ndarray | None = None


def partial_to_psi(pv: np.ndarray, rmat: np.ndarray) -> np.ndarray:
    """Psi from innovation variances v and R = I - rho: Psi = D R^-1 D, D = sqrt(v / diag R^-1)."""
    c = np.linalg.inv(rmat)
    dd = np.sqrt(pv / np.diag(c))
    return dd[:, None] * c * dd[None, :]


class ParameterLayout:
    """All parameters of `spec` for an estimator, with fixed values set from the data."""

    def __init__(self, spec: ModelSpec, item_variances: np.ndarray, estimator: str):
        self.spec = spec
        self.estimator = estimator
        self.items = spec.items
        self.states = spec.state_names
        self.p, self.k, self.q = len(self.items), spec.k, spec.lags
        self.entries: list[Entry] = self._declare(item_variances)
        self.free_entries = [e for e in self.entries if e.free]
        self.n_free = len(self.free_entries)

    # ----- declaration ---------------------------------------------------------------
    def _declare(self, item_variances: np.ndarray) -> list[Entry]:
        spec, items, states = self.spec, self.items, self.states
        out: list[Entry] = []
        marker_id = spec.identification == "marker"
        for j, s in enumerate(spec.states):
            for it in s.items:
                fixed = marker_id and it == s.marker_item
                out.append(Entry("loading", s.name, it, 0, "lam", (items.index(it), j), not fixed, 1.0))
        for i, it in enumerate(items):
            out.append(Entry("intercept", it, it, 0, "nu", (i,), True))
        single = {s.items[0] for s in spec.states if len(s.items) == 1}
        for i, it in enumerate(items):
            if it in single:
                rel = spec.reliability_of(it)
                value = 0.0 if rel is None else (1.0 - rel) * float(item_variances[i])
                out.append(Entry("unique", it, it, 0, "theta", (i,), False, value))
            else:
                out.append(Entry("unique", it, it, 0, "theta", (i,), True))
        for it in spec.unique_autocorrelation:
            i = items.index(it)
            out.append(Entry("unique_autocorrelation", it, it, 1, "d", (i,), True))
        for lag in range(1, self.q + 1):
            mask = spec.path_mask(lag)
            for i, to in enumerate(states):
                for j, fr in enumerate(states):
                    kind = "lag2" if lag == 2 else ("inertia" if i == j else "cross_lagged")
                    out.append(Entry(kind, fr, to, lag, "B", (lag - 1, i, j), bool(mask[i, j])))
        var_id = spec.identification == "variance"
        if spec.innovations == "partial":
            zeros = {frozenset(z) for z in spec.partial_zeros}
            for i, s in enumerate(states):
                out.append(Entry("innovation", s, s, 0, "pv", (i,), not var_id, 1.0))
            for i in range(self.k):
                for j in range(i):
                    free = frozenset((states[i], states[j])) not in zeros
                    out.append(Entry("partial_correlation", states[j], states[i], 0, "pcor", (i, j), free))
        else:
            for i in range(self.k):
                for j in range(i + 1):
                    if i == j:
                        out.append(Entry("innovation", states[i], states[i], 0, "psi", (i, i), not var_id, 1.0))
                    else:
                        free = spec.innovations == "free"
                        out.append(Entry("innovation", states[j], states[i], 0, "psi", (i, j), free))
        if self.estimator == "first-copy-free" and self.q > 0:
            names = [f"{s}@t-{lag}" for lag in range(self.q) for s in states]
            for a in range(self.q * self.k):
                for b in range(a + 1):
                    out.append(Entry("first_copy", names[b], names[a], 0, "phif", (a, b), True))
            for i, s in enumerate(states):
                out.append(Entry("latent_intercept", s, s, 0, "c", (i,), True))
        return out

    # ----- vector <-> matrices -------------------------------------------------------
    def unpack(self, theta: np.ndarray) -> Matrices:
        p, k, q = self.p, self.k, self.q
        m = Matrices(nu=np.zeros(p), lam=np.zeros((p, k)), theta=np.zeros(p), d=np.zeros(p),
                     lagged=np.zeros((q, k, k)), psi=np.zeros((k, k)))
        partial = self.spec.innovations == "partial"
        if partial:
            m.pv = np.ones(k)
            m.rmat = np.eye(k)
        if self.estimator == "first-copy-free" and q > 0:
            m.phif = np.zeros((q * k, q * k))
            m.c = np.zeros(k)
        it = iter(theta)
        for e in self.entries:
            v = float(next(it)) if e.free else e.value
            if e.block == "nu":
                m.nu[e.index] = v
            elif e.block == "lam":
                m.lam[e.index] = v
            elif e.block == "theta":
                m.theta[e.index] = v
            elif e.block == "d":
                m.d[e.index] = v
            elif e.block == "B":
                m.lagged[e.index] = v
            elif e.block == "psi":
                i, j = e.index
                m.psi[i, j] = m.psi[j, i] = v
            elif e.block == "pv":
                m.pv[e.index] = v
            elif e.block == "pcor":
                i, j = e.index
                m.rmat[i, j] = m.rmat[j, i] = -v
            elif e.block == "phif":
                a, b = e.index
                m.phif[a, b] = m.phif[b, a] = v
            elif e.block == "c":
                m.c[e.index] = v
        if partial:
            m.psi = partial_to_psi(m.pv, m.rmat)
        return m

    def pack(self, m: Matrices) -> np.ndarray:
        """The free values of `m` as a flat vector (inverse of `unpack`)."""
        out = []
        for e in self.free_entries:
            if e.block == "nu":
                out.append(m.nu[e.index])
            elif e.block == "lam":
                out.append(m.lam[e.index])
            elif e.block == "theta":
                out.append(m.theta[e.index])
            elif e.block == "d":
                out.append(m.d[e.index])
            elif e.block == "B":
                out.append(m.lagged[e.index])
            elif e.block == "psi":
                out.append(m.psi[e.index])
            elif e.block == "pv":
                out.append(m.pv[e.index])
            elif e.block == "pcor":
                out.append(-m.rmat[e.index])
            elif e.block == "phif":
                out.append(m.phif[e.index])
            elif e.block == "c":
                out.append(m.c[e.index])
        return np.asarray(out, dtype=float)

    def gradient_vector(self, m: Matrices, g: Gradients) -> np.ndarray:
        """d loglik / d free values, from the matrix gradients (symmetric blocks counted twice
        off the diagonal; partial form by the chain rule through Psi = D R^-1 D)."""
        gpv = gr = None
        if self.spec.innovations == "partial":
            gpv, gr = _partial_chain(m.pv, m.rmat, g.psi)
        out = np.empty(self.n_free)
        for n, e in enumerate(self.free_entries):
            if e.block == "nu":
                out[n] = g.nu[e.index]
            elif e.block == "lam":
                out[n] = g.lam[e.index]
            elif e.block == "theta":
                out[n] = g.theta[e.index]
            elif e.block == "d":
                out[n] = g.d[e.index]
            elif e.block == "B":
                out[n] = g.lagged[e.index]
            elif e.block == "psi":
                i, j = e.index
                out[n] = g.psi[i, i] if i == j else g.psi[i, j] + g.psi[j, i]
            elif e.block == "pv":
                out[n] = gpv[e.index]
            elif e.block == "pcor":
                out[n] = gr[e.index]
            elif e.block == "phif":
                a, b = e.index
                out[n] = g.phif[a, a] if a == b else g.phif[a, b] + g.phif[b, a]
            elif e.block == "c":
                out[n] = g.c[e.index]
        return out

    def bounds(self) -> list[tuple[float | None, float | None]]:
        out: list[tuple[float | None, float | None]] = []
        for e in self.free_entries:
            if e.is_variance:
                out.append((VARIANCE_FLOOR if e.block != "theta" else 0.0, None))
            elif e.block in ("pcor", "d"):
                out.append((-0.999, 0.999))
            else:
                out.append((None, None))
        return out


def _partial_chain(pv: np.ndarray, rmat: np.ndarray, gpsi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Gradients w.r.t. v and rho of f(Psi), Psi = D C D, C = R^-1, D = diag(sqrt(v / c)).

    With G = df/dPsi (symmetric): a_i = (C D G)_ii sqrt(v_i / c_i); df/dv_i = a_i / v_i;
    df/drho_ij = 2 [C (D G D - diag(a / c)) C]_ij (since dR_ij = -drho_ij, dC = -C dR C).
    """
    gs = 0.5 * (gpsi + gpsi.T)
    c = np.linalg.inv(rmat)
    cd = np.diag(c)
    dd = np.sqrt(pv / cd)
    a = np.einsum("im,m,mi->i", c, dd, gs) * dd
    gv = a / pv
    h = dd[:, None] * gs * dd[None, :] - np.diag(a / cd)
    grho = 2.0 * (c @ h @ c)
    return gv, grho
