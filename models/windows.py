"""Lag windows: occasions t, t-1, ..., t-L stacked in one row, all inside one segment.

Column block j (columns j*p .. (j+1)*p - 1) holds occasion t-j. A window exists only when
its L+1 occasions are consecutive occasions of one segment; windows whose values are all
missing are dropped, windows with some missing values are kept for full-information
estimation.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from lagwise.models.diary import Diary


@dataclass(frozen=True, eq=False)
class LagWindows:
    """Stacked windows of one depth. data: (n_windows, (depth + 1) * p), NaN = missing."""

    depth: int
    items: tuple[str, ...]
    data: np.ndarray
    occasion: np.ndarray  # index of occasion t (the newest) of each window
    diary_occasions: int | None = None  # occasions of the diary the windows were cut from
    segment: np.ndarray | None = None   # segment of each window (None: not recorded)
    day: np.ndarray | None = None       # day of each window's newest occasion

    @property
    def days_joined(self) -> bool:
        """True when a segment spans more than one day (windows then cross nights)."""
        if self.segment is None or self.day is None or not self.segment.size:
            return False
        order = np.lexsort((self.day, self.segment))
        seg, day = self.segment[order], self.day[order]
        return bool(np.any((seg[1:] == seg[:-1]) & (day[1:] != day[:-1])))

    @property
    def n_occasions(self) -> int:
        """Occasions of the source diary (when not recorded: up to the newest window's)."""
        if self.diary_occasions is not None:
            return self.diary_occasions
        return int(self.occasion.max()) + 1 if self.occasion.size else 0

    @property
    def n_windows(self) -> int:
        return int(self.data.shape[0])

    @property
    def complete(self) -> np.ndarray:
        """(n_windows,) bool: no missing value in the window."""
        return ~np.isnan(self.data).any(axis=1)

    @property
    def n_complete(self) -> int:
        return int(self.complete.sum())

    @property
    def n_partial(self) -> int:
        return self.n_windows - self.n_complete

    def column_names(self) -> list[str]:
        """Item names with their lag, e.g. 'calm@t', 'calm@t-1'."""
        return [f"{item}@t" if j == 0 else f"{item}@t-{j}"
                for j in range(self.depth + 1) for item in self.items]


def lag_windows(diary: Diary, depth: int) -> LagWindows:
    """All windows of `depth` + 1 consecutive occasions within one segment."""
    if depth < 0:
        raise ValueError("window depth must be 0 or more")
    n, p = diary.values.shape
    seg = np.asarray(diary.segment)
    t = np.arange(depth, n)
    ok = np.ones(t.shape, dtype=bool)
    for j in range(1, depth + 1):
        ok &= seg[t - j] == seg[t]
    t = t[ok]
    data = np.empty((t.size, (depth + 1) * p))
    for j in range(depth + 1):
        data[:, j * p:(j + 1) * p] = diary.values[t - j]
    keep = ~np.isnan(data).all(axis=1)
    return LagWindows(depth=depth, items=diary.items, data=data[keep], occasion=t[keep],
                      diary_occasions=n, segment=seg[t[keep]], day=np.asarray(diary.day)[t[keep]])
