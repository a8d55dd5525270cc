"""From a raw table to a Diary: item columns, the time index, days and segments.

Three ways to place rows in time (models.diary.TimeSettings):
- grid: a day column and a prompt-number column. Each day gets the prompts first..last,
  where first is 1 (0 when the file numbers prompts from 0) and last is the highest prompt
  number in the file, or first + prompts_per_day - 1 when the schedule is given. Prompts
  absent from the file become unanswered occasions. Days are sorted: numbers numerically,
  dates chronologically, other labels in order of first appearance.
- timestamp: occasions sorted by time; a new segment starts at a change of calendar date
  (unless days are joined) and after a gap longer than `max_gap_minutes`. Times written with
  a UTC offset (+02:00) are ordered and their gaps measured in UTC, so the hour repeated when
  clocks go back stays in order; the diary keeps the local wall time (dates, prompt ranks).
- order: rows in file order, one day, one segment.
By default each day is its own segment; `days_independent=False` joins the days into one
segment (a gap longer than `max_gap_minutes` still starts a new one).
"""

from __future__ import annotations

import difflib
from typing import Iterable, Sequence

import numpy as np
import pandas as pd

from lagwise.models.diary import Diary, TimeSettings
from lagwise.models.errors import DataError
from lagwise.models.readers import (
    drop_empty_rows,
    looks_like_dates,
    missing_cells,
    numeric_cells,
    show_cell,
    time_cells,
    utc_offsets,
    where,
)
from lagwise.models.limits import PROMPTS_PER_DAY

FEW_ANSWERS = 10  # an item with fewer answers than this gets a warning
MAX_OCCASIONS = 5_000_000


def diary_from_frame(
    frame: pd.DataFrame,
    items: Sequence[str] | None,
    time: TimeSettings,
    missing_codes: Iterable[object] = (),
    source: str = "",
    prompts_per_day: int | None = None,
) -> Diary:
    """A Diary from a table: `items` (None: every numeric column that is not a time column)."""
    label = source or "the table"
    missing_codes = tuple(missing_codes)
    frame = frame.set_axis([str(c) for c in frame.columns], axis=1)
    frame = drop_empty_rows(frame)
    if len(frame) == 0:
        raise DataError(f"{label}: there are no data rows")
    for column in time.columns():
        _require_column(frame, column, label)
    names, notes = _choose_items(frame, items, time, missing_codes, label)
    values = np.column_stack([_item_values(frame, name, missing_codes, label) for name in names])
    notes += _item_notes(names, values, label)

    if time.mode == "grid":
        placed = _place_grid(frame, values, time, label, prompts_per_day)
    elif time.mode == "timestamp":
        placed = _place_by_time(frame, values, time, label)
    elif time.mode == "order":
        placed = _place_in_order(values)
    else:
        raise DataError(f"unknown time mode '{time.mode}' (use grid, timestamp or order)")
    grid_values, segment, day, day_labels, prompt, stamps, time_notes = placed
    return Diary(
        items=tuple(names), values=grid_values, segment=segment, day=day,
        day_labels=tuple(day_labels), prompt=prompt, time=stamps, source=source,
        warnings=tuple(notes + time_notes),
    )


# ---------------------------------------------------------------------------- items

def _require_column(frame: pd.DataFrame, column: str, label: str) -> None:
    if column in frame.columns:
        return
    columns = list(frame.columns)
    close = difflib.get_close_matches(column, columns, n=1)
    hint = f" (did you mean '{close[0]}'?)" if close else ""
    shown = ", ".join(columns[:12]) + (", ..." if len(columns) > 12 else "")
    raise DataError(f"{label}: no column named '{column}'{hint}; the columns are: {shown}")


def _choose_items(frame: pd.DataFrame, items: Sequence[str] | None, time: TimeSettings,
                  missing_codes: tuple, label: str) -> tuple[list[str], list[str]]:
    """Item names and notes about left-out columns."""
    time_columns = set(time.columns())
    if items is not None:
        names = [str(name).strip() for name in items if str(name).strip()]
        for name in names:
            _require_column(frame, name, label)
            if name in time_columns:
                raise DataError(f"{label}: column '{name}' is a time column and cannot be an item")
            if names.count(name) > 1:
                raise DataError(f"{label}: item '{name}' is listed twice")
        _require_two(names, label)
        return names, []
    names, text, empty = [], [], []
    for column in frame.columns:
        if column in time_columns:
            continue
        values, bad = numeric_cells(frame[column])
        filled = bad | ~np.isnan(values)
        if not filled.any():
            empty.append(column)
        elif (~bad & filled).sum() >= 0.5 * filled.sum():  # mostly numbers: typos are errors
            names.append(column)
        else:
            text.append(column)
    notes = []
    if text:
        notes.append("left out columns that do not hold numbers: " + ", ".join(text))
    if empty:
        notes.append("left out empty columns: " + ", ".join(empty))
    _require_two(names, label, notes)
    return names, notes


def _require_two(names: list[str], label: str, notes: Sequence[str] = ()) -> None:
    detail = "".join(f"; {note}" for note in notes)
    if len(names) == 0:
        raise DataError(f"{label}: no item columns (columns holding numbers); "
                        f"a diary needs at least two items{detail}")
    if len(names) == 1:
        raise DataError(f"{label}: only one item column ('{names[0]}'); "
                        f"a diary needs at least two items{detail}")


def _item_values(frame: pd.DataFrame, name: str, missing_codes: tuple, label: str) -> np.ndarray:
    series = frame[name]
    values, bad = numeric_cells(series, missing_codes)
    if bad.any():
        pos = int(np.flatnonzero(bad)[0])
        raise DataError(f"{label}, column '{name}', {where(frame, pos)}: "
                        f"{show_cell(series.iloc[pos])} is not a number")
    if np.isnan(values).all():
        raise DataError(f"{label}, column '{name}': the item has no answers "
                        "(every cell is empty or a missing-value code)")
    return values


def _item_notes(names: list[str], values: np.ndarray, label: str) -> list[str]:
    notes = []
    for j, name in enumerate(names):
        answers = values[~np.isnan(values[:, j]), j]
        if answers.min() == answers.max():
            notes.append(f"item '{name}' has the same answer ({_number_label(answers[0])}) "
                         "every time it was answered")
        if answers.size < FEW_ANSWERS:
            notes.append(f"item '{name}' has only {answers.size} answers")
    return notes


# ---------------------------------------------------------------------------- time modes

def _place_grid(frame, values, time: TimeSettings, label, prompts_per_day):
    if not (time.day and time.prompt):
        raise DataError("a grid of prompts needs both a day column and a prompt-number column")
    day_of_row, day_labels = _days(frame, time.day, label, time.date_format)
    prompt_of_row = _prompt_numbers(frame, time.prompt, label)
    first = 0 if prompt_of_row.min() == 0 else 1
    last = int(prompt_of_row.max())
    if prompts_per_day is not None:
        PROMPTS_PER_DAY.check(prompts_per_day, DataError)
        scheduled_last = first + int(prompts_per_day) - 1
        if last > scheduled_last:
            pos = int(np.argmax(prompt_of_row))
            raise DataError(f"{label}, column '{time.prompt}', {where(frame, pos)}: prompt "
                            f"{last} is beyond the {prompts_per_day} prompts per day")
        last = scheduled_last
    per_day = last - first + 1
    n_days = len(day_labels)
    if n_days * per_day > MAX_OCCASIONS:
        raise DataError(f"{label}: {n_days} days of {per_day} prompts is too large a grid; "
                        f"check column '{time.prompt}'")
    slot = day_of_row * per_day + (prompt_of_row.astype(np.int64) - first)
    _refuse_duplicates(frame, slot, day_of_row, prompt_of_row, day_labels, label)

    n = n_days * per_day
    grid_values = np.full((n, values.shape[1]), np.nan)
    grid_values[slot] = values
    day = np.repeat(np.arange(n_days), per_day)
    segment = day.copy() if time.days_independent else np.zeros(n, dtype=np.int64)
    prompt = np.tile(np.arange(first, last + 1, dtype=float), n_days)
    stamps = None
    if time.time:
        row_times = _times(frame, time.time, label, True, time.date_format)
        stamps = np.full(n, np.datetime64("NaT"), dtype="datetime64[ns]")
        stamps[slot] = row_times
    return grid_values, segment, day, day_labels, prompt, stamps, []


def _place_by_time(frame, values, time: TimeSettings, label):
    if not time.time:
        raise DataError("placing prompts by time needs a time column")
    row_times = _times(frame, time.time, label, False, time.date_format)
    notes = []
    instants = _utc(frame, time.time, row_times, label)
    order = np.argsort(instants, kind="stable")
    stamps, instants = row_times[order], instants[order]
    dates = stamps.astype("datetime64[D]")
    if (dates[1:] < dates[:-1]).any():
        pos = int(order[1:][dates[1:] < dates[:-1]][0])
        raise DataError(f"{label}, column '{time.time}', {where(frame, pos)}: the UTC offsets put "
                        "this time before the previous day's last prompt")
    unique_dates, day = np.unique(dates, return_inverse=True)
    new = np.zeros(stamps.size, dtype=bool)
    if time.days_independent:
        new[1:] |= dates[1:] != dates[:-1]
    if time.max_gap_minutes is not None:
        gap = np.timedelta64(int(round(time.max_gap_minutes * 60e9)), "ns")
        new[1:] |= (instants[1:] - instants[:-1]) > gap
    segment = np.cumsum(new)
    prompt = np.arange(stamps.size) - np.searchsorted(day, day) + 1  # rank within the day
    shared = int((instants[1:] == instants[:-1]).sum())
    if shared:
        notes.append(f"{shared} prompts have the same time as the prompt before them")
    labels = [str(d) for d in unique_dates]
    in_order = bool((order[1:] > order[:-1]).all())  # a sorted file needs no copy
    return (values if in_order else values[order], segment.astype(np.int64),
            day.astype(np.int64), labels,
            prompt.astype(float), stamps, notes)


def _place_in_order(values):
    n = values.shape[0]
    zeros = np.zeros(n, dtype=np.int64)
    return values, zeros, zeros.copy(), ["1"], np.full(n, np.nan), None, []


# ---------------------------------------------------------------------------- time columns

def _days(frame: pd.DataFrame, column: str, label: str, date_format: str | None = None
          ) -> tuple[np.ndarray, list[str]]:
    """Day index per row (0 = first day after sorting) and day labels."""
    series = frame[column]
    _refuse_empty(frame, series, column, label, "no day")
    numbers, bad = numeric_cells(series)
    if not bad.any():
        unique, index = np.unique(numbers, return_inverse=True)
        return index, [_number_label(u) for u in unique]
    if date_format or looks_like_dates(series):
        stamps, bad = _read_times(series, column, label, date_format)
        if bad.any():
            pos = int(np.flatnonzero(bad)[0])
            raise DataError(f"{label}, column '{column}', {where(frame, pos)}: "
                            f"{show_cell(series.iloc[pos])} is not a date")
        unique, index = np.unique(stamps.astype("datetime64[D]"), return_inverse=True)
        return index, [str(u) for u in unique]
    texts = [str(cell).strip() for cell in series.to_numpy(dtype=object)]
    labels = list(dict.fromkeys(texts))
    position = {text: i for i, text in enumerate(labels)}
    return np.array([position[t] for t in texts], dtype=np.int64), labels


def _prompt_numbers(frame: pd.DataFrame, column: str, label: str) -> np.ndarray:
    series = frame[column]
    _refuse_empty(frame, series, column, label, "no prompt number")
    numbers, bad = numeric_cells(series)
    wrong = bad | (numbers < 0) | (numbers != np.round(numbers))
    if wrong.any():
        pos = int(np.flatnonzero(wrong)[0])
        raise DataError(f"{label}, column '{column}', {where(frame, pos)}: "
                        f"{show_cell(series.iloc[pos])} is not a prompt number (0, 1, 2, ...)")
    return numbers


def _times(frame: pd.DataFrame, column: str, label: str, allow_empty: bool,
           date_format: str | None = None):
    series = frame[column]
    if not allow_empty:
        _refuse_empty(frame, series, column, label, "no time")
    stamps, bad = _read_times(series, column, label, date_format)
    if bad.any():
        pos = int(np.flatnonzero(bad)[0])
        shape = f" in the format {date_format!r}" if date_format else ""
        raise DataError(f"{label}, column '{column}', {where(frame, pos)}: "
                        f"{show_cell(series.iloc[pos])} is not a date and time{shape}")
    return stamps


def _read_times(series: pd.Series, column: str, label: str, date_format: str | None):
    """`time_cells` with its DataError (an ambiguous or unusable format) placed in the file."""
    try:
        return time_cells(series, date_format)
    except DataError as error:
        raise DataError(f"{label}, column '{column}': {error}") from None


def _utc(frame: pd.DataFrame, column: str, stamps: np.ndarray, label: str) -> np.ndarray:
    """The instants of local `stamps`: minus their UTC offsets when the times carry them."""
    offsets = utc_offsets(frame[column])
    given = ~np.isnan(offsets)
    if not given.any():
        return stamps
    if not given.all():
        pos = int(np.flatnonzero(~given)[0])
        raise DataError(f"{label}, column '{column}', {where(frame, pos)}: this time has no UTC "
                        "offset while others have one, so their order cannot be told")
    return stamps - (offsets * 60e9).astype("timedelta64[ns]")


def _refuse_empty(frame, series, column, label, what) -> None:
    empty = missing_cells(series)
    if empty.any():
        pos = int(np.flatnonzero(empty)[0])
        raise DataError(f"{label}, column '{column}', {where(frame, pos)}: {what}")


def _refuse_duplicates(frame, slot, day_of_row, prompt_of_row, day_labels, label) -> None:
    order = np.argsort(slot, kind="stable")
    same = np.flatnonzero(slot[order][1:] == slot[order][:-1])
    if same.size == 0:
        return
    first, second = int(order[same[0]]), int(order[same[0] + 1])
    raise DataError(
        f"{label}: day {day_labels[day_of_row[first]]}, prompt "
        f"{_number_label(prompt_of_row[first])} appears twice: {where(frame, first, second)}"
    )


def _number_label(value: float) -> str:
    value = float(value)
    return str(int(value)) if value.is_integer() else f"{value:g}"
