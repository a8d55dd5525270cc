"""Resampled diaries for the bootstrap (models.bootstrap): "had the diary been a little
different".

Two schemes, chosen from the diary's own segment and day arrays:

- **Days** (`DAYS`), when the days are independent: every segment lies within one day (each
  segment is a day or part of one), so no lag window links two days. Whole segments are drawn
  with replacement (arch's `IIDBootstrap` over the segment numbers: the nonparametric
  bootstrap of Efron 1979 with the independent segments as its units, as for clustered
  data in Davison & Hinkley 1997, ch. 3). Each drawn segment stays a segment of its own, with its occasions,
  answers, missed prompts, prompt numbers and times; the resampled diary is the drawn
  segments one after another.
- **Stationary blocks** (`BLOCKS`), when days are joined (a segment spans several days):
  the stationary bootstrap of Politis & Romano (1994), arch's `StationaryBootstrap`, draws
  the occasions in blocks of geometric length (wrapping round at the end). The drawn
  occasions' answers (missed prompts included) are placed on the diary's own grid of
  occasions, segments, days and prompts, so windows join drawn blocks as they join
  neighbouring prompts.

The expected block length is arch's `optimal_block_length` (Politis & White 2004, corrected
by Patton, Politis & White 2009; its "stationary" column) of one series, `block_series`:
each item of the model standardized over its answered prompts (mean 0, standard deviation 1,
divisor n), then, at every occasion with at least one answer, the mean of the standardized
items answered there; occasions with no answer (missed prompts) are left out, so the series
is the answered prompts in time order. The length is at least 1.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from arch.bootstrap import IIDBootstrap, StationaryBootstrap, optimal_block_length

from lagwise.models.diary import Diary
from lagwise.models.errors import EstimationError

DAYS = "days"
BLOCKS = "stationary blocks"
METHODS = (DAYS, BLOCKS)


def days_independent(diary: Diary) -> bool:
    """True when every segment lies within one day (no segment spans a night)."""
    segment, day = np.asarray(diary.segment), np.asarray(diary.day)
    same_segment = segment[1:] == segment[:-1]
    return bool(np.all(day[1:][same_segment] == day[:-1][same_segment]))


def segment_rows(diary: Diary) -> list[np.ndarray]:
    """The occasions of each segment, in segment order (segments are runs of occasions)."""
    segment = np.asarray(diary.segment)
    starts = np.flatnonzero(np.r_[True, segment[1:] != segment[:-1]])
    ends = np.r_[starts[1:], segment.size]
    return [np.arange(a, b) for a, b in zip(starts, ends)]


def block_series(diary: Diary) -> np.ndarray:
    """The series whose optimal block length sets the stationary bootstrap (module docstring)."""
    values = np.asarray(diary.values, dtype=float)
    mean = np.nanmean(values, axis=0)
    sd = np.nanstd(values, axis=0)
    usable = np.isfinite(sd) & (sd > 0)
    z = (values[:, usable] - mean[usable]) / sd[usable]
    answered = ~np.all(np.isnan(z), axis=1)
    return np.nanmean(z[answered], axis=1)


def block_length(diary: Diary) -> float:
    """Expected block length for the stationary bootstrap: optimal_block_length of
    `block_series`, at least 1."""
    series = block_series(diary)
    if series.size < 10:
        raise EstimationError(f"The diary has {series.size} answered prompts: too few to "
                              "choose a block length for the bootstrap.")
    return max(1.0, float(optimal_block_length(series)["stationary"].iloc[0]))


@dataclass(frozen=True)
class Resampler:
    """How to draw one resampled diary: `method` (DAYS or BLOCKS) and, for blocks, the
    expected block length in occasions."""

    method: str
    block_length: float | None = None

    def draw(self, diary: Diary, rng: np.random.Generator) -> Diary:
        """One resampled diary, drawn with `rng` (so the same generator gives the same diary)."""
        if self.method == DAYS:
            return resample_segments(diary, rng)
        return resample_blocks(diary, float(self.block_length), rng)


def resampler(diary: Diary) -> Resampler:
    """The scheme for this diary: DAYS when its days are independent, else BLOCKS."""
    if days_independent(diary):
        n = len(segment_rows(diary))
        if n < 2:
            raise EstimationError("The diary has one segment: the day bootstrap needs at least "
                                  "two days (or parts of days) to draw from.")
        return Resampler(DAYS)
    return Resampler(BLOCKS, block_length(diary))


def resample_segments(diary: Diary, rng: np.random.Generator) -> Diary:
    """Whole segments drawn with replacement, each kept as a segment of its own."""
    rows = segment_rows(diary)
    drawn = next(IIDBootstrap(np.arange(len(rows)), seed=rng).bootstrap(1))[0][0]
    index = np.concatenate([rows[s] for s in drawn])
    lengths = [rows[s].size for s in drawn]
    segment = np.repeat(np.arange(len(drawn)), lengths)
    first_day = [int(diary.day[rows[s][0]]) for s in drawn]
    return Diary(items=diary.items, values=diary.values[index], segment=segment,
                 day=segment.copy(), day_labels=tuple(diary.day_labels[d] for d in first_day),
                 prompt=np.asarray(diary.prompt)[index],
                 time=None if diary.time is None else np.asarray(diary.time)[index],
                 source=diary.source)


def resample_blocks(diary: Diary, length: float, rng: np.random.Generator) -> Diary:
    """Occasions drawn in stationary blocks, placed on the diary's own grid."""
    index = next(StationaryBootstrap(length, np.arange(diary.n_occasions),
                                     seed=rng).bootstrap(1))[0][0]
    return Diary(items=diary.items, values=diary.values[index], segment=diary.segment,
                 day=diary.day, day_labels=diary.day_labels, prompt=diary.prompt,
                 time=diary.time, source=diary.source)
