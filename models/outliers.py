"""Answers far outside the rest of an item: likely codes for "no answer" (-99, 999) that the
import was not told about.

The rule (Tukey's fences, common practice): the item's typical answers are those within the
inner fences, Q1 - 1.5 IQR to Q3 + 1.5 IQR. When they fit a usual scale
(models.scales.COMMON_SCALES: the smallest that holds them), an answer outside that scale is
far out; when they fit none, an answer beyond the outer fences (3 IQR from the quartiles) is.
So a rare 0 or 100 on a 0-100 slider is never flagged, while -99 or 999 beside answers
between 0 and 100 is.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from lagwise.models.scales import COMMON_SCALES, guess_scale

INNER, OUTER = 1.5, 3.0  # Tukey's fences, in IQRs beyond the quartiles (common practice)


@dataclass(frozen=True)
class FarValue:
    """One value far outside the other answers of an item, and how often it was given."""

    item: str
    value: float
    count: int

    @property
    def code(self) -> str:
        """The value as a missing-value code (as models.readers reads codes back)."""
        return format(self.value, ".15g")


def far_values(items: tuple[str, ...], values: np.ndarray) -> tuple[FarValue, ...]:
    """Every value of every item (columns of `values`, NaN = unanswered) that is far out."""
    out = []
    for j, name in enumerate(items):
        x = values[:, j][~np.isnan(values[:, j])]
        if x.size < 4:
            continue
        q1, q3 = np.percentile(x, [25, 75])
        typical = (x >= q1 - INNER * (q3 - q1)) & (x <= q3 + INNER * (q3 - q1))
        scale = guess_scale(x[typical])
        if scale not in COMMON_SCALES:
            scale = (q1 - OUTER * (q3 - q1), q3 + OUTER * (q3 - q1))
        far = (x < scale[0]) | (x > scale[1])
        found, counts = np.unique(x[far], return_counts=True)
        out += [FarValue(name, float(v), int(c)) for v, c in zip(found, counts)]
    return tuple(out)
