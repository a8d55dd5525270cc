"""The free parameter vector and the model matrices: packing, unpacking, bounds, typical
sizes, the chain rule for gradients and the standardized solution.

The parameters are the spec's declaration (`ModelSpec.parameters`), laid out here once: all
matrices live in one flat buffer, and each entry is a position in it (plus the position of its
mirror for symmetric blocks). Unpacking writes the free vector into the buffer with one
indexed assignment; packing reads it back; the gradient of a free value is the sum of the
matrix gradients at its position and its mirror, times the block's sign. The partial-
correlation form is chained through Psi = D R^-1 D first (see `partial_to_psi`). In the
continuous-time layout the free values are the drift A and diffusion W; unpacking also fills
the lag-1 paths and innovations with their discrete values over the layout's reference
interval, B = expm(A D) and Q(D) (models.drift), so the shared solution step (stationary
covariance, standardization) reads them like a lag-1 model.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from lagwise.models.blocks import Block, Entry, Scales
from lagwise.models.drift import discrete_system
from lagwise.models.spec import ModelSpec


@dataclass
class Matrices:
    """Model matrices in the spec's item/state order (views into one buffer)."""

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
    drift: np.ndarray | None = None      # (k, k), continuous time: A
    diffusion: np.ndarray | None = None  # (k, k), continuous time: W = GG'


@dataclass
class Gradients:
    """d loglik / d each matrix element, elements treated as independent (same shapes as
    Matrices; blocks a model does not use are None)."""

    nu: np.ndarray
    lam: np.ndarray
    theta: np.ndarray
    d: np.ndarray
    lagged: np.ndarray
    psi: np.ndarray
    phif: np.ndarray | None = None
    c: np.ndarray | None = None
    drift: np.ndarray | None = None
    diffusion: np.ndarray | None = None


_GRADIENT_BLOCKS = frozenset(("nu", "lam", "theta", "d", "lagged", "psi", "phif", "c", "drift",
                              "diffusion"))


def _zeros(n: int) -> np.ndarray:
    return np.zeros(n)


def partial_to_psi(pv: np.ndarray, rmat: np.ndarray) -> np.ndarray:
    """Psi from innovation variances v and R = I - rho: Psi = D R^-1 D, D = sqrt(v / diag R^-1)."""
    c = np.linalg.inv(rmat)
    dd = np.sqrt(pv / np.diag(c))
    return dd[:, None] * c * dd[None, :]


def _partial_chain(pv: np.ndarray, rmat: np.ndarray, gpsi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Element-wise gradients with respect to v and R of f(Psi), Psi = D C D, C = R^-1,
    D = diag(sqrt(v / c)). With G = df/dPsi (symmetrised): a_i = (C D G)_ii sqrt(v_i / c_i);
    df/dv_i = a_i / v_i; df/dR = -C (D G D - diag(a / c)) C (since dC = -C dR C)."""
    gs = 0.5 * (gpsi + gpsi.T)
    c = np.linalg.inv(rmat)
    cd = np.diag(c)
    dd = np.sqrt(pv / cd)
    a = np.einsum("im,m,mi->i", c, dd, gs) * dd
    h = dd[:, None] * gs * dd[None, :] - np.diag(a / cd)
    return a / pv, -(c @ h @ c)


class ParameterLayout:
    """The parameters of `spec` as a flat free vector (see the module docstring).

    item_variances fix the unique variance of single-item states given a reliability
    (default: ones, enough for counting and naming); `fixed_values` holds each entry's fixed
    value (NaN for free entries). free_first_copies: the first-copy-free estimator's blocks.
    interval: the continuous-time model, with this reference interval (see the module
    docstring).
    """

    def __init__(self, spec: ModelSpec, item_variances: np.ndarray | None = None,
                 free_first_copies: bool = False, interval: float | None = None):
        self.spec = spec
        self.free_first_copies = bool(free_first_copies and spec.lags > 0)
        self.interval = interval
        self.items = spec.items
        self.states = spec.state_names
        self.p, self.k = len(self.items), spec.k
        self.q = 1 if interval is not None else spec.lags
        self.partial = spec.innovations == "partial" and interval is None
        item_var = np.ones(self.p) if item_variances is None else np.asarray(item_variances, float)
        self.entries: tuple[Entry, ...] = spec.parameters(self.free_first_copies,
                                                          interval is not None)
        self.free_entries = tuple(e for e in self.entries if e.free)
        self.n_free = len(self.free_entries)
        self._shapes = self._matrix_shapes()
        offsets, slices, total = {}, {}, 0
        for name, shape in self._shapes.items():
            size = int(np.prod(shape))
            offsets[name], slices[name] = total, (total, total + size, shape)
            total += size
        self._offsets, self._slices, self._size = offsets, slices, total  # `total`: a spare zero
        self._base = np.zeros(total + 1)
        if self.partial:
            self._matrix(self._base, "rmat")[...] = np.eye(self.k)
        self._free_mask = np.array([e.free for e in self.entries], dtype=bool)
        self.fixed_values = np.array([np.nan if e.free else e.value * (
            item_var[e.index[0]] if e.per_item_variance else 1.0) for e in self.entries])
        for e, value in zip(self.entries, self.fixed_values):
            if not e.free:
                for pos in self._positions(e):
                    self._base[pos] = e.block.sign * value
        self._pos = np.array([self._positions(e)[0] for e in self.free_entries], dtype=np.int64)
        self._mirror = np.array([self._positions(e)[-1] if e.block.symmetric and len(set(e.index)) > 1
                                 else total for e in self.free_entries], dtype=np.int64)
        self._sign = np.array([e.block.sign for e in self.free_entries])
        self._groups = self._by_block(self.free_entries)
        self._all_groups = self._by_block(self.entries)
        self._lower = np.full(self.n_free, -np.inf)
        self._upper = np.full(self.n_free, np.inf)
        for n, e in enumerate(self.free_entries):
            if e.is_variance:
                self._lower[n] = e.block.floor
            elif e.block.bounded:
                self._lower[n], self._upper[n] = -0.999, 0.999

    # ----- the buffer -----------------------------------------------------------------------
    def _matrix_shapes(self) -> dict[str, tuple[int, ...]]:
        p, k, q = self.p, self.k, self.q
        shapes = {"nu": (p,), "lam": (p, k), "theta": (p,), "d": (p,), "lagged": (q, k, k),
                  "psi": (k, k)}
        if self.partial:
            shapes.update(pv=(k,), rmat=(k, k))
        if self.free_first_copies:
            shapes.update(phif=(q * k, q * k), c=(k,))
        if self.interval is not None:
            shapes.update(drift=(k, k), diffusion=(k, k))
        return shapes

    def _matrix(self, buffer: np.ndarray, name: str) -> np.ndarray:
        lo, hi, shape = self._slices[name]
        return buffer[lo:hi].reshape(shape)

    def _positions(self, e: Entry) -> list[int]:
        """Flat positions of an entry in the buffer (two for an off-diagonal symmetric entry)."""
        shape = self._shapes[e.block.matrix]
        lo = self._offsets[e.block.matrix]
        out = [lo + int(np.ravel_multi_index(e.index, shape))]
        if e.block.symmetric and e.index[0] != e.index[1]:
            out.append(lo + int(np.ravel_multi_index(e.index[::-1], shape)))
        return out

    @staticmethod
    def _by_block(entries) -> list[tuple[Block, np.ndarray, tuple[np.ndarray, ...]]]:
        """(block, positions in `entries`, index arrays) for each block present."""
        groups: dict[str, list[int]] = {}
        for n, e in enumerate(entries):
            groups.setdefault(e.block.name, []).append(n)
        out = []
        for members in groups.values():
            block = entries[members[0]].block
            index = tuple(np.array(ix) for ix in zip(*(entries[n].index for n in members)))
            out.append((block, np.array(members), index))
        return out

    # ----- vector <-> matrices --------------------------------------------------------------
    def unpack(self, theta: np.ndarray) -> Matrices:
        buffer = self._base.copy()
        values = self._sign * np.asarray(theta, dtype=float)
        buffer[self._pos] = values
        buffer[self._mirror] = values
        buffer[-1] = 0.0
        m = Matrices(**{name: buffer[lo:hi].reshape(shape)
                        for name, (lo, hi, shape) in self._slices.items()})
        if self.partial:
            m.psi[...] = partial_to_psi(m.pv, m.rmat)
        if self.interval is not None:
            b, q = discrete_system(m.drift, m.diffusion, np.array([self.interval]))
            m.lagged[0], m.psi[...] = b[0], q[0]
        return m

    def pack(self, m: Matrices) -> np.ndarray:
        """The free values of `m` as a flat vector (inverse of `unpack`)."""
        buffer = np.zeros(self._size + 1)
        for name in self._shapes:
            self._matrix(buffer, name)[...] = getattr(m, name)
        return self._sign * buffer[self._pos]

    def gradient_vector(self, m: Matrices, g: Gradients) -> np.ndarray:
        """d loglik / d free values from the element-wise matrix gradients."""
        parts = [np.ravel(getattr(g, name)) if name in _GRADIENT_BLOCKS else _zeros(hi - lo)
                 for name, (lo, hi, _) in self._slices.items()]
        buffer = np.concatenate(parts + [_zeros(1)])
        if self.partial:
            gpv, grmat = _partial_chain(m.pv, m.rmat, g.psi)
            self._matrix(buffer, "pv")[...] = gpv
            self._matrix(buffer, "rmat")[...] = grmat
        buffer[-1] = 0.0
        return self._sign * (buffer[self._pos] + buffer[self._mirror])

    # ----- what the optimiser and the results need ------------------------------------------
    def bounds(self) -> tuple[np.ndarray, np.ndarray]:
        """Lower and upper bounds of the free values (-inf / inf where unbounded)."""
        return self._lower, self._upper

    def sizes(self, theta0: np.ndarray, item_var: np.ndarray) -> np.ndarray:
        """Typical size of each free value (the optimiser works on theta / size)."""
        out = np.empty(self.n_free)
        for block, members, index in self._groups:
            out[members] = block.size(np.asarray(theta0)[members], index, item_var)
        return out

    def standardized(self, values: np.ndarray, scales: Scales) -> np.ndarray:
        """Standardized values of all entries (`values` in the order of `entries`)."""
        out = np.empty(len(self.entries))
        for block, members, index in self._all_groups:
            out[members] = values[members] * block.standardise(index, scales)
        return out

    def values(self, theta: np.ndarray) -> np.ndarray:
        """Values of all entries (free from `theta`, fixed as declared)."""
        out = self.fixed_values.copy()
        out[self._free_mask] = theta
        return out

    def theta_from(self, estimates: Mapping[tuple[str, str, str], float],
                   default: float | None = None) -> np.ndarray:
        """The free vector from estimates named by (kind, from, to) (another layout's or a
        result's); `default` for parameters it does not name (KeyError when None)."""
        if default is None:
            return np.array([estimates[e.key] for e in self.free_entries], dtype=float)
        return np.array([estimates.get(e.key, default) for e in self.free_entries], dtype=float)

    def directions(self, m: Matrices) -> Matrices:
        """d matrices / d each free value at `m`, batched along a first axis of length n_free
        (forward mode; the partial-correlation form through Psi = D R^-1 D)."""
        n = self.n_free
        buffer = np.zeros((n, self._size + 1))
        rows = np.arange(n)
        buffer[rows, self._pos] = self._sign
        buffer[rows, self._mirror] = self._sign
        buffer[:, -1] = 0.0
        d = Matrices(**{name: buffer[:, lo:hi].reshape((n,) + shape)
                        for name, (lo, hi, shape) in self._slices.items()})
        if self.partial:
            d.psi = _partial_directions(m.pv, m.rmat, d.pv, d.rmat)
        return d


def _partial_directions(pv: np.ndarray, rmat: np.ndarray, dpv: np.ndarray, drmat: np.ndarray
                        ) -> np.ndarray:
    """dPsi for Psi = D C D, C = R^-1, D = diag(sqrt(v / diag C)): dC = -C dR C,
    dD_i = D_i / 2 (dv_i / v_i - dC_ii / C_ii), dPsi = dD C D + D dC D + D C dD."""
    c = np.linalg.inv(rmat)
    cd = np.diag(c)
    dd = np.sqrt(pv / cd)
    dc = -c @ drmat @ c
    ddd = 0.5 * dd * (dpv / pv - np.diagonal(dc, axis1=1, axis2=2) / cd)
    cdd = c * dd[None, :]                        # C D
    return (ddd[:, :, None] * cdd[None] + dd[None, :, None] * dc * dd[None, None, :]
            + (dd[:, None] * c)[None] * ddd[:, None, :])
