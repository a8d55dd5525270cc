"""The parameter blocks of the model, declared once: which matrix each fills, its symmetry,
bounds, typical size for the optimiser and how it is standardised.

Blocks (usual symbols): nu (intercepts), Lambda (loadings), Theta (unique variances), d
(lag-1 autocorrelation of unique parts), B_l (lagged paths), Psi (innovation covariances) —
or, in the partial-correlation form, innovation variances v and partial correlations rho with
Psi = D R^-1 D, R = I - rho (off-diagonal), D = diag(sqrt(v / diag R^-1)) — and, for the
first-copy-free estimator, Phi_F (free covariance of the oldest q copies) and c (latent
intercepts of the regressed copies); for the continuous-time estimator, A (drift, row = the
state that changes) and W = GG' (diffusion, as variances and covariances).

Every rule works on all entries of a block at once: `index` is a tuple of integer arrays
(one per matrix dimension) and `x` the entries' values.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

VARIANCE_FLOOR = 1e-8
CORRELATION_BOUND = 0.999

Index = tuple[np.ndarray, ...]


@dataclass(frozen=True)
class Scales:
    """What the block rules may look at: the items' and states' standard deviations, the
    free first-copy covariance (first-copy-free only), and the items' variances."""

    sd_item: np.ndarray
    sd_state: np.ndarray
    item_var: np.ndarray
    first_copy: np.ndarray | None = None


@dataclass(frozen=True)
class Block:
    """One block of parameters stored in the matrix `matrix` (an attribute of Matrices).

    symmetric: the entry (i, j) also sets (j, i); sign: the matrix holds sign x the
    parameter; variance: "all" (every entry is a variance), "diagonal" (diagonal entries
    are) or "" (none), with lower bound `floor`; bounded: limited to +-CORRELATION_BOUND;
    size(x0, index, item_var): the typical size the optimiser divides by;
    standardise(index, scales): the factor that turns an estimate into its standardized
    value (stationary standard deviations of items and states).
    """

    name: str
    matrix: str
    symmetric: bool
    sign: float
    variance: str
    floor: float
    bounded: bool
    size: Callable[[np.ndarray, Index, np.ndarray], np.ndarray]
    standardise: Callable[[Index, Scales], np.ndarray]

    def is_variance(self, index: tuple[int, ...]) -> bool:
        return self.variance == "all" or (self.variance == "diagonal" and index[0] == index[1])


def _constant(value: float) -> Callable[[np.ndarray, Index, np.ndarray], np.ndarray]:
    return lambda x0, index, item_var: np.full(x0.shape, value)


def _covariance_size(x0: np.ndarray, index: Index, item_var: np.ndarray) -> np.ndarray:
    return np.maximum(np.abs(x0), 1e-3 * float(np.mean(item_var)))


def _one(index: Index, s: Scales) -> np.ndarray:
    return np.ones(index[0].shape)


NU = Block("nu", "nu", False, 1.0, "", 0.0, False,
           lambda x0, ix, v: np.sqrt(np.maximum(v[ix[0]], 1e-8)),
           lambda ix, s: 1.0 / s.sd_item[ix[0]])
LAMBDA = Block("lam", "lam", False, 1.0, "", 0.0, False,
               lambda x0, ix, v: np.maximum(np.abs(x0), 0.1),
               lambda ix, s: s.sd_state[ix[1]] / s.sd_item[ix[0]])
THETA = Block("theta", "theta", False, 1.0, "all", 0.0, False,
              lambda x0, ix, v: v[ix[0]],
              lambda ix, s: 1.0 / s.sd_item[ix[0]] ** 2)
UNIQUE_AR = Block("d", "d", False, 1.0, "", 0.0, True, _constant(0.5), _one)
PATHS = Block("B", "lagged", False, 1.0, "", 0.0, False, _constant(0.5),
              lambda ix, s: s.sd_state[ix[2]] / s.sd_state[ix[1]])
PSI = Block("psi", "psi", True, 1.0, "diagonal", VARIANCE_FLOOR, False, _covariance_size,
            lambda ix, s: 1.0 / (s.sd_state[ix[0]] * s.sd_state[ix[1]]))
PARTIAL_VARIANCE = Block("pv", "pv", False, 1.0, "all", VARIANCE_FLOOR, False, _covariance_size,
                         lambda ix, s: 1.0 / s.sd_state[ix[0]] ** 2)
PARTIAL_CORRELATION = Block("pcor", "rmat", True, -1.0, "", 0.0, True, _constant(0.5), _one)
FIRST_COPY = Block("phif", "phif", True, 1.0, "diagonal", VARIANCE_FLOOR, False, _covariance_size,
                   lambda ix, s: 1.0 / np.sqrt(s.first_copy[ix[0], ix[0]] * s.first_copy[ix[1], ix[1]]))
LATENT_INTERCEPT = Block("c", "c", False, 1.0, "", 0.0, False,
                         lambda x0, ix, v: np.full(x0.shape, np.sqrt(np.mean(v))),
                         lambda ix, s: 1.0 / s.sd_state[ix[0]])
DRIFT = Block("A", "drift", False, 1.0, "", 0.0, False, _constant(0.5),
              lambda ix, s: s.sd_state[ix[1]] / s.sd_state[ix[0]])
DIFFUSION = Block("W", "diffusion", True, 1.0, "diagonal", VARIANCE_FLOOR, False, _covariance_size,
                  lambda ix, s: 1.0 / (s.sd_state[ix[0]] * s.sd_state[ix[1]]))


@dataclass(frozen=True)
class Entry:
    """One parameter: its kind and direction (models.kinds), its block and place in the
    block's matrix, free or fixed. A fixed entry holds `value`, or `value` x the item's
    variance when `per_item_variance` (a single-item state's unique variance from a given
    reliability)."""

    kind: str
    from_: str
    to: str
    lag: int
    block: Block
    index: tuple[int, ...]
    free: bool
    value: float = 0.0
    per_item_variance: bool = False

    @property
    def key(self) -> tuple[str, str, str]:
        """(kind, from, to): names the parameter across layouts and in results."""
        return (self.kind, self.from_, self.to)

    @property
    def is_variance(self) -> bool:
        return self.block.is_variance(self.index)
