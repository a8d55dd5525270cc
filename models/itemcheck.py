"""Checks of single items that need no model: answers, infinite values, no variation, and
scales beyond floating point (used by screening and, before estimating, by
models.conditioning). Moments are computed on each column divided by its largest absolute
answer, so they neither overflow nor underflow.
"""

from __future__ import annotations

import numpy as np

CONSTANT = 1e-9          # SD below this share of the item's largest absolute value: constant
EXTREME = (1e-50, 1e50)  # an item SD outside: its moments leave floating point; refuse


def item_scales(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per column: the largest absolute answer and the standard deviation (divisor n) of the
    answers, safe from overflow and underflow (computed on the answers divided by the
    largest); 0 for a column without answers, inf for one with an infinite answer."""
    seen = ~np.isnan(values)
    top = np.where(seen, np.abs(values), 0.0).max(axis=0, initial=0.0)
    with np.errstate(all="ignore"):
        unit = np.where(top > 0, top, 1.0)
        sd = np.sqrt(answered_moments(values / unit)[1]) * unit
    return top, np.where(np.isfinite(top), sd, np.inf)


def answered_moments(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Mean and variance (divisor n) of each column over its answered rows; 0 for a column
    without answers (where numpy's NaN-aware functions would warn)."""
    seen = ~np.isnan(x)
    n = np.maximum(seen.sum(axis=0), 1)
    mean = np.where(seen, x, 0.0).sum(axis=0) / n
    return mean, (np.where(seen, x - mean, 0.0) ** 2).sum(axis=0) / n


def problem_columns(values: np.ndarray) -> np.ndarray:
    """Per column: True when `item_problem` has something to say."""
    answers = (~np.isnan(values)).sum(axis=0)
    top, sd = item_scales(values)
    constant = sd <= CONSTANT * top
    return (answers < 2) | ~np.isfinite(top) | constant | (sd < EXTREME[0]) | (sd > EXTREME[1])


def item_problem(name: str, column: np.ndarray) -> str | None:
    """Why item `name` (its column, NaN = unanswered) cannot be modelled, or None: fewer than
    two answers, infinite values, no variation (SD at most CONSTANT of its largest absolute
    answer), or an SD outside EXTREME."""
    x = column[~np.isnan(column)]
    top, sd = (float(v[0]) for v in item_scales(column[:, None]))
    if x.size < 2:
        return f"item '{name}' has {x.size} answers: it needs at least 2 to be modelled"
    if not np.isfinite(top):
        return f"item '{name}' has infinite values: check the data file"
    if sd <= CONSTANT * top:
        return (f"item '{name}' does not vary (every answer is about {x[0]:.6g}): it carries "
                "no information about the states; drop it from the model")
    if not EXTREME[0] <= sd <= EXTREME[1]:
        return (f"item '{name}' has values far too {'large' if sd > 1 else 'small'} to estimate "
                f"with (SD {sd:.3g}): rescale it before fitting (for example multiply by "
                f"{10.0 ** -np.round(np.log10(sd)):.0e})")
    return None
