"""The Diary value: one person's answers on a time grid.

A diary holds the items matrix (occasions x items, NaN where a prompt was not answered
or an item skipped), and per occasion its segment, day and prompt number or time.
Occasions are in time order. A segment is a run of occasions that lag windows may link;
by default each day is its own segment, so no window spans a night (common practice).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal

import numpy as np

from lagwise.models import jsonread as jr
from lagwise.models.errors import DataError, FieldError
from lagwise.models.limits import MAX_GAP_MINUTES

TimeMode = Literal["grid", "timestamp", "order"]
TIME_MODES: tuple[str, ...] = ("grid", "timestamp", "order")


@dataclass(frozen=True)
class TimeSettings:
    """How occasions are placed in time.

    mode "grid": `day` and `prompt` columns give a regular grid per day; prompts absent from
    the file become unanswered occasions. mode "timestamp": the `time` column orders the
    occasions; a new segment starts at a calendar-date change or after a gap longer than
    `max_gap_minutes`. mode "order": rows in file order, one segment.
    `days_independent=False` joins all days into one segment (windows may then span nights).
    `date_format`: a strftime format (e.g. "%d/%m/%Y %H:%M") for the time or day column, needed
    when the data cannot tell whether the day or the month comes first (None: recognised).
    """

    mode: TimeMode = "order"
    day: str | None = None
    prompt: str | None = None
    time: str | None = None
    max_gap_minutes: float | None = None
    days_independent: bool = True
    date_format: str | None = None

    def __post_init__(self) -> None:
        if self.max_gap_minutes is not None:
            MAX_GAP_MINUTES.check(self.max_gap_minutes, DataError)

    def columns(self) -> tuple[str, ...]:
        """The file columns this setting uses as time columns."""
        return tuple(c for c in (self.day, self.prompt, self.time) if c)

    def to_json(self) -> dict:
        return {"mode": self.mode, "day": self.day, "prompt": self.prompt, "time": self.time,
                "max_gap_minutes": self.max_gap_minutes,
                "days_independent": self.days_independent, "date_format": self.date_format}

    @classmethod
    def from_json(cls, doc: object, where: str = "", others: tuple[str, ...] = ()
                  ) -> "TimeSettings":
        """Settings from `to_json` output; FieldError names a malformed field. Every field but
        `date_format` (absent from older files) is required, and the object may hold no other
        keys but `others` (read by the caller)."""
        return cls(**jr.read_fields(doc, where, (
            jr.field("mode", jr.choice, choices=TIME_MODES),
            jr.field("day", jr.text, null=True),
            jr.field("prompt", jr.text, null=True),
            jr.field("time", jr.text, null=True),
            jr.field("max_gap_minutes", _gap_minutes),
            jr.field("days_independent", jr.boolean),
            jr.field("date_format", jr.text, None, null=True),
        ), closed=True, others=others))


def _gap_minutes(value: object, where: str) -> float | None:
    gap = jr.number(value, where, null=True)
    if gap is not None and not MAX_GAP_MINUTES.allows(gap):
        raise FieldError(where, f"should be {MAX_GAP_MINUTES.describe()}")
    return gap


@dataclass(frozen=True, eq=False)
class Diary:
    """Occasions x items answers with their place in time.

    values:  (n_occasions, n_items) float array, NaN for unanswered.
    segment: (n_occasions,) int array, non-decreasing ids 0..S-1.
    day:     (n_occasions,) int array, day index 0..D-1 (labels in `day_labels`).
    prompt:  (n_occasions,) float array, prompt number within the day (NaN if unknown).
    time:    (n_occasions,) datetime64[ns] array, or None when the file had no timestamps.
    """

    items: tuple[str, ...]
    values: np.ndarray
    segment: np.ndarray
    day: np.ndarray
    day_labels: tuple[str, ...]
    prompt: np.ndarray
    time: np.ndarray | None = None
    source: str = ""
    warnings: tuple[str, ...] = field(default=())

    @property
    def n_occasions(self) -> int:
        return int(self.values.shape[0])

    @property
    def n_items(self) -> int:
        return int(self.values.shape[1])

    @property
    def n_days(self) -> int:
        return len(self.day_labels)

    @property
    def answered(self) -> np.ndarray:
        """(n_occasions,) bool: at least one item answered."""
        return ~np.all(np.isnan(self.values), axis=1)

    def select(self, items: tuple[str, ...] | list[str]) -> "Diary":
        """The same diary restricted to `items` (in the given order)."""
        idx = [self.items.index(name) for name in items]
        return Diary(
            items=tuple(items), values=self.values[:, idx], segment=self.segment, day=self.day,
            day_labels=self.day_labels, prompt=self.prompt, time=self.time, source=self.source,
            warnings=self.warnings,
        )
