"""The time between consecutive prompts of a diary, for the continuous-time estimator.

From the prompts' times (timestamp diaries), or from the prompt numbers times a stated prompt
spacing (day + prompt diaries). Nights either restart the states (each of the diary's
segments starts afresh, as the exact estimator does) or carry them over the real time between
the last prompt of one day and the first of the next (times needed).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from lagwise.models.diary import Diary
from lagwise.models.errors import DataError, SpecError
from lagwise.models.estimators import INTERVAL_UNITS

DEFAULT_UNIT = "hours"
DEFAULT_NIGHT = "restart"


@dataclass(frozen=True, eq=False)
class Intervals:
    """segment (n,) ids of the filtered series; interval (n,) time since the previous prompt
    in `unit` (NaN at segment starts); `steps` the distinct intervals and `step` (n,) each
    occasion's position among them (0 at segment starts)."""

    segment: np.ndarray
    interval: np.ndarray
    steps: np.ndarray
    step: np.ndarray
    unit: str

    @property
    def median(self) -> float:
        return float(np.nanmedian(self.interval))


def prompt_intervals(diary: Diary, unit: str | None = None, night: str | None = None,
                     spacing: float | None = None) -> Intervals:
    """The intervals of `diary` (see the module docstring); SpecError when the diary has
    neither times nor a stated spacing, DataError for a prompt without a time."""
    unit = unit or DEFAULT_UNIT
    carry = (night or DEFAULT_NIGHT) == "carry"
    segment = np.asarray(diary.segment)
    if diary.time is not None:
        if spacing is not None:
            raise SpecError("The diary has the time of each prompt: leave out the prompt spacing.")
        time = np.asarray(diary.time, dtype="datetime64[ns]")
        if np.isnat(time).any():
            raise DataError("Some prompts have no time: the continuous-time estimator needs "
                            "the time of every prompt.")
        hours = (time - time[0]) / np.timedelta64(1, "h")
    else:
        if spacing is None:
            raise SpecError("The continuous-time estimator needs the time of each prompt "
                            "(--time COL) or the spacing of the prompts (--prompt-spacing).")
        if carry:
            raise SpecError("Carrying the states over the night needs the time of each prompt; "
                            "with day and prompt numbers the nights restart.")
        prompt = np.asarray(diary.prompt, dtype=float)
        if np.isnan(prompt).any():
            raise DataError("Some prompts have no prompt number: state their times instead.")
        hours = prompt * float(spacing) * INTERVAL_UNITS[unit]
    if carry:
        segment = np.zeros(segment.size, dtype=int)
    interval = np.r_[np.nan, np.diff(hours)] / INTERVAL_UNITS[unit]
    start = np.r_[True, segment[1:] != segment[:-1]]
    interval[start] = np.nan
    if np.any(interval[~start] < 0):
        raise DataError("The prompts are not in time order.")
    if start.all():
        raise SpecError("No two prompts follow each other within a day: the intervals "
                        "between prompts cannot be estimated from this diary.")
    steps, inverse = np.unique(interval[~start], return_inverse=True)
    step = np.zeros(segment.size, dtype=np.int64)
    step[~start] = inverse
    return Intervals(segment=segment, interval=interval, steps=steps, step=step, unit=unit)
