"""Where a diary's answers are, organised once for the Kalman filter (models.kalman).

The covariance recursion of the filter does not depend on the answers, only on which items
were answered at each earlier occasion of the segment. `filter_plan` groups the occasions
whose segments share that history (the same position in the segment, the same answered items
so far) into "history nodes" (a prefix tree of the answer patterns): a diary of complete days
has one node per prompt position, however many days it has. The nodes are made a position at
a time while at least _SIDE_BY_SIDE segments are that long; beyond, each longer segment
continues as a chain, one node per occasion. For the mean recursions, segments longer than
max(_PIECE, sqrt(longest segment)) occasions are cut into pieces that run side by side
(`Lanes`). The plan depends only on which values are missing, on the segments and, when the
transition differs between steps (unequal intervals in continuous time), on each step's
class: occasions reached by steps of different classes never share a node. It is built once
per diary and reused for every evaluation.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from lagwise.models.errors import EstimationError

_PIECE = 64     # segments longer than this are cut into pieces for the mean recursions
_SIDE_BY_SIDE = 16   # fewest segments whose history nodes are made together, a position at a time


@dataclass(frozen=True, eq=False)
class FilterPlan:
    """Where the diary's answers are, organised for the filter (see the module docstring).

    Depends only on which values are missing and on the segments, so it is built once per
    diary and reused for every evaluation. History node j: the answered items
    `patterns[node_pattern[j]]`, the node of the previous occasion `node_parent[j]` (-1 at a
    segment start), reached by a step of class `node_step[j]` (0 at segment starts and when all
    steps are alike); `lone[j]` when no other history node has node j's step class (so no
    other node can share its covariances); `occasion_node` (n,) gives each occasion's node
    and `step` (n,) the class of the step that reaches it. The nodes of position b are
    levels[b] = (lo, hi) for the first positions; those from levels[-1][1] on are chains,
    the rest of each longer segment: one node per occasion, each after its parent.
    """

    observed: np.ndarray
    patterns: np.ndarray          # (distinct answer patterns, p) bool
    node_pattern: np.ndarray
    node_parent: np.ndarray
    node_step: np.ndarray
    lone: np.ndarray              # (history nodes,) bool: no other node has its step class
    occasion_node: np.ndarray
    step: np.ndarray
    levels: tuple[tuple[int, int], ...]
    starts: np.ndarray            # segments, longest first: first occasion
    lengths: np.ndarray           # and number of occasions
    later: np.ndarray             # occasions that are not the first of their segment
    forward: Lanes               # the mean recursion, forwards
    backward: Lanes              # and backwards (the adjoints of the means)

    @property
    def n_nodes(self) -> int:
        return int(self.node_parent.size)


def filter_plan(values: np.ndarray, segment: np.ndarray, step: np.ndarray | None = None
                ) -> FilterPlan:
    """Build the plan of `values` (n, p) (NaN = unanswered) with segment ids (n,) (a new
    segment starts where the id changes) and optional step classes (n,) (non-negative ints,
    the class of the transition into each occasion; ignored at segment starts).

    The history nodes are made a position at a time, vectorised over the segments, as long
    as at least _SIDE_BY_SIDE segments reach the position (the first position always); the
    rest of each longer segment is a chain, made in one go.
    """
    y = np.asarray(values, dtype=float)
    if y.ndim != 2:
        raise EstimationError("The data must be a table of occasions by items.")
    n = y.shape[0]
    starts, lengths = _layout(segment, n)
    observed = ~np.isnan(y)
    patterns, pattern_of = _unique_rows(observed)
    n_pat = patterns.shape[0]
    steps = np.zeros(n, dtype=np.int64) if step is None else np.asarray(step, np.int64).copy()
    if steps.shape != (n,) or (n and steps.min() < 0):
        raise EstimationError("One non-negative step class per occasion is needed.")
    steps[starts] = 0
    n_step = int(steps.max(initial=0)) + 1
    pattern_of = pattern_of * n_step + steps     # (answered items, step class)
    node_prev = np.full(starts.size, -1, dtype=np.int64)
    occasion_node = np.empty(n, dtype=np.int64)
    levels, pattern_parts, parent_parts = [], [], []
    n_key = n_pat * n_step
    depth = int(lengths[_SIDE_BY_SIDE - 1]) if lengths.size >= _SIDE_BY_SIDE else 1
    total = 0
    for b in range(depth):
        n_act = n_active(lengths, b)
        rows = starts[:n_act] + b
        key = (node_prev[:n_act] + 1) * n_key + pattern_of[rows]    # (parent, items, step)
        unique, inverse = np.unique(key, return_inverse=True)
        node_prev[:n_act] = occasion_node[rows] = total + inverse
        levels.append((total, total + unique.size))
        pattern_parts.append(unique % n_key)
        parent_parts.append(unique // n_key - 1)
        total += unique.size
    size = np.maximum(lengths - depth, 0)
    within = np.arange(size.sum()) - np.repeat(np.cumsum(size) - size, size)
    rows = np.repeat(starts + depth, size) + within
    ids = total + np.arange(rows.size)
    parent = ids - 1
    parent[within == 0] = node_prev[size > 0]
    occasion_node[rows] = ids
    first = np.zeros(n, dtype=bool)
    first[starts] = True
    keys = np.concatenate(pattern_parts + [pattern_of[rows]])
    node_step = keys % n_step
    return FilterPlan(observed=observed, patterns=patterns, node_pattern=keys // n_step,
                      node_parent=np.concatenate(parent_parts + [parent]),
                      node_step=node_step, lone=np.bincount(node_step)[node_step] == 1,
                      occasion_node=occasion_node, step=steps,
                      levels=tuple(levels), starts=starts,
                      lengths=lengths, later=np.flatnonzero(~first),
                      forward=_lanes(starts, lengths, 1),
                      backward=_lanes(starts + lengths - 1, lengths, -1))


def _unique_rows(observed: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The distinct rows of a bool table, sorted, and the index of each row among them (as
    np.unique(axis=0), by a stable lexicographic sort of the bool columns: linear in rows)."""
    order = np.lexsort(observed.T[::-1])
    ranked = observed[order]
    new = np.r_[True, np.any(ranked[1:] != ranked[:-1], axis=1)]
    index = np.empty(observed.shape[0], dtype=np.int64)
    index[order] = np.cumsum(new) - 1
    return ranked[new], index


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


def n_active(lengths: np.ndarray, b: int) -> int:
    """Number of segments longer than b (lengths sorted in decreasing order)."""
    return int(np.searchsorted(-lengths, -b, side="left"))


@dataclass(frozen=True, eq=False)
class Lanes:
    """A mean recursion x_t = M_t x_t-step + g_t along every segment, cut into pieces.

    Each segment, in the recursion's direction (step 1 forwards, -1 backwards), is cut into
    pieces of one length (the last one shorter): its head (first piece) and its tails.
    heads[b] / tails[b]: the occasion at position b of each head / tail longer than b
    (longest first). `first`: the tails that follow a head; links[i] = (tails, the tails
    they follow), for the second, third, ... tail of each segment.
    """

    step: int
    heads: tuple[np.ndarray, ...]
    tails: tuple[np.ndarray, ...]
    first: np.ndarray
    links: tuple[tuple[np.ndarray, np.ndarray], ...]


def _lanes(origins: np.ndarray, lengths: np.ndarray, step: int) -> Lanes:
    """Lanes of the segments that begin (in the recursion's direction) at `origins`, with
    `lengths` (decreasing); pieces of max(_PIECE, sqrt(longest)) occasions, so that the
    recursion takes O(sqrt(T)) vectorised steps on one long segment of T occasions."""
    piece = max(_PIECE, math.isqrt(int(lengths[0])))
    cuts = (lengths - 1) // piece                      # tails per segment
    seg = np.repeat(np.arange(lengths.size), cuts)     # the tails, segment by segment,
    ordinal = np.arange(seg.size) - np.repeat(np.cumsum(cuts) - cuts, cuts) + 1   # 1, 2, ...
    offset = ordinal * piece
    size = np.minimum(piece, lengths[seg] - offset)
    order = np.argsort(-size, kind="stable")           # longest first
    rank = np.empty_like(order)
    rank[order] = np.arange(order.size)
    tail_origin = (origins[seg] + step * offset)[order]
    links = []
    for c in range(2, int(ordinal.max(initial=1)) + 1):
        tail = np.flatnonzero(ordinal == c)
        links.append((rank[tail], rank[tail - 1]))
    return Lanes(step=step, heads=_positions(origins, np.minimum(piece, lengths), step),
                  tails=_positions(tail_origin, size[order], step),
                  first=rank[ordinal == 1], links=tuple(links))


def _positions(origins: np.ndarray, sizes: np.ndarray, step: int) -> tuple[np.ndarray, ...]:
    """Occasions at each position b of the pieces (sizes decreasing) longer than b."""
    if not sizes.size:
        return ()
    return tuple(origins[:n_active(sizes, b)] + step * b for b in range(int(sizes[0])))
