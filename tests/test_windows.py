"""Lag windows: counts on complete and gappy diaries, layout checked against pandas."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pandas as pd
import pytest

from lagwise.models.diary import TimeSettings
from lagwise.models.timegrid import diary_from_frame
from lagwise.models.windows import lag_windows


@pytest.mark.parametrize("days, prompts", [(1, 3), (3, 5), (7, 6), (14, 10)])
def test_complete_diary_window_counts(grid_table, grid_settings, days, prompts):
    # Common practice: no lag window crosses a night, so each day of B prompts gives B - 1
    # windows of depth 1 and B - 2 of depth 2: D x (B - 1) and D x (B - 2) in all.
    diary = diary_from_frame(grid_table(days, prompts), None, grid_settings)
    assert diary.n_occasions == days * prompts
    depth1, depth2 = lag_windows(diary, 1), lag_windows(diary, 2)
    assert (depth1.n_windows, depth1.n_complete) == (days * (prompts - 1), days * (prompts - 1))
    assert (depth2.n_windows, depth2.n_complete) == (days * (prompts - 2), days * (prompts - 2))
    assert lag_windows(diary, 0).n_windows == days * prompts


def test_joined_days_let_windows_span_nights(grid_table, grid_settings):
    # One segment over all D x B occasions: D x B - 1 windows of depth 1, D x B - 2 of depth 2.
    joined = replace(grid_settings, days_independent=False)
    diary = diary_from_frame(grid_table(4, 5), None, joined)
    assert lag_windows(diary, 1).n_complete == 4 * 5 - 1
    assert lag_windows(diary, 2).n_complete == 4 * 5 - 2


def test_counts_with_missed_prompts_match_a_hand_count(grid_table, grid_settings):
    # Three days of five prompts. Day 1 misses prompt 3; day 2 misses prompt 5 (the last, so
    # the grid still has 5 prompts from days 1 and 3); day 3 misses prompts 2 and 3 together.
    table = grid_table(3, 5, drop=[(1, 3), (2, 5), (3, 2), (3, 3)])
    # Day 2, prompt 2: one item skipped (the prompt is answered, the window is partial).
    table.loc[(table.day == 2) & (table.prompt == 2), "tense"] = np.nan
    diary = diary_from_frame(table, None, grid_settings)
    assert diary.n_occasions == 15
    assert int(diary.answered.sum()) == 11
    # Hand count, depth 1 (pairs of neighbouring prompts in a day):
    #   day 1: 1-2 complete, 2-3 partial, 3-4 partial, 4-5 complete       -> 2 complete, 2 partial
    #   day 2: 1-2 partial (skip at 2), 2-3 partial, 3-4 complete, 4-5 partial
    #                                                                      -> 1 complete, 3 partial
    #   day 3: 1-2 partial, 2-3 both missed (no window), 3-4 partial, 4-5 complete
    #                                                                      -> 1 complete, 2 partial
    depth1 = lag_windows(diary, 1)
    assert (depth1.n_complete, depth1.n_partial) == (4, 7)
    # Depth 2 (three neighbouring prompts): every triple of days 1 and 3 contains a missed
    # prompt (day 1: 1-2-3, 2-3-4, 3-4-5; day 3: 1-2-3, 2-3-4, 3-4-5, none all missed);
    # day 2: 1-2-3 partial (skip), 2-3-4 partial (skip), 3-4-5 partial (missed 5).
    depth2 = lag_windows(diary, 2)
    assert (depth2.n_complete, depth2.n_partial) == (0, 9)


def test_window_rows_match_pandas_shift_within_day(grid_table, grid_settings):
    # Block j of a window holds occasion t - j: the same as pandas' groupby(day).shift(j) on
    # the full grid, keeping rows whose oldest occasion lies in the same day.
    table = grid_table(5, 6, drop=[(1, 2), (2, 6), (3, 1), (3, 4), (5, 3)], seed=3)
    table.loc[3, "calm"] = np.nan
    diary = diary_from_frame(table, None, grid_settings)
    grid = pd.DataFrame(diary.values, columns=list(diary.items))
    grid["day"] = diary.day
    for depth in (0, 1, 2, 3):
        blocks = [grid.groupby("day")[list(diary.items)].shift(j) for j in range(depth + 1)]
        position = grid.groupby("day").cumcount()
        expected = pd.concat(blocks, axis=1).to_numpy()[position.to_numpy() >= depth]
        expected = expected[~np.isnan(expected).all(axis=1)]
        windows = lag_windows(diary, depth)
        np.testing.assert_array_equal(windows.data, expected)
        assert windows.column_names()[:3] == [f"{name}@t" for name in diary.items]


def test_gap_in_time_starts_a_new_segment():
    # Prompts at 8:00, 10:00, 12:00, 18:00 (a 6-hour gap) and 20:00 on one day, 8:00 the next
    # day. With a 4-hour longest gap the segments are {8, 10, 12}, {18, 20}, {next day 8}:
    # depth-1 windows (3 - 1) + (2 - 1) + 0 = 3.
    times = ["2024-03-01 08:00", "2024-03-01 10:00", "2024-03-01 12:00", "2024-03-01 18:00",
             "2024-03-01 20:00", "2024-03-02 08:00"]
    table = pd.DataFrame({"time": times, "a": [1.0, 2, 3, 4, 5, 6], "b": [2.0, 1, 2, 1, 2, 1]})
    diary = diary_from_frame(table, None, TimeSettings(mode="timestamp", time="time",
                                                        max_gap_minutes=240))
    assert diary.segment.tolist() == [0, 0, 0, 1, 1, 2]
    assert lag_windows(diary, 1).n_windows == 3


def test_negative_depth_is_refused(grid_table, grid_settings):
    diary = diary_from_frame(grid_table(), None, grid_settings)
    with pytest.raises(ValueError):
        lag_windows(diary, -1)
