"""From a table to a Diary: the three time modes, items, missing codes, errors and warnings."""

from __future__ import annotations

import tempfile
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd
import pyreadstat
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lagwise.models.diary import Diary, TimeSettings
from lagwise.models.errors import DataError, LagwiseError
from lagwise.models.timegrid import diary_from_frame
from lagwise.models.recipe import load_diary

STAMPS = TimeSettings(mode="timestamp", time="time")


# ---------------------------------------------------------------- grid

def test_grid_inserts_absent_prompts_and_keeps_values_in_place(grid_table, grid_settings):
    table = grid_table(3, 4, drop=[(1, 2), (3, 4)])
    shuffled = table.sample(frac=1.0, random_state=1)
    diary = diary_from_frame(shuffled, None, grid_settings)
    assert diary.items == ("calm", "tense", "tired")
    assert diary.n_occasions == 12 and diary.day_labels == ("1", "2", "3")
    assert diary.prompt.tolist() == [1, 2, 3, 4] * 3
    assert diary.segment.tolist() == [0] * 4 + [1] * 4 + [2] * 4
    expected = table.set_index(["day", "prompt"])
    for t in range(diary.n_occasions):
        key = (diary.day[t] + 1, int(diary.prompt[t]))
        if key in expected.index:
            assert diary.values[t].tolist() == expected.loc[key].tolist()
        else:
            assert np.isnan(diary.values[t]).all()
    assert diary.answered.sum() == 10


def test_grid_sorts_numbered_days_numerically(grid_settings):
    table = pd.DataFrame({"day": [10, 9, 2], "prompt": [1, 1, 1], "a": [1.0, 2, 3],
                          "b": [3.0, 2, 1]})
    diary = diary_from_frame(table, None, grid_settings)
    assert diary.day_labels == ("2", "9", "10")
    assert diary.values[:, 0].tolist() == [3.0, 2.0, 1.0]


def test_grid_sorts_dated_days_chronologically(grid_settings):
    # Day-first dates: text order would put 01.04 before 31.03.
    table = pd.DataFrame({"day": ["01.04.2024", "31.03.2024", "31.03.2024"],
                          "prompt": [1, 1, 2], "a": [1.0, 2, 3], "b": [1.0, 2, 2]})
    diary = diary_from_frame(table, None, grid_settings)
    assert diary.day_labels == ("2024-03-31", "2024-04-01")
    np.testing.assert_array_equal(diary.values[:, 0], [2.0, 3.0, 1.0, np.nan])


def test_grid_keeps_text_days_in_order_of_appearance(grid_settings):
    table = pd.DataFrame({"day": ["mon", "tue", "mon"], "prompt": [1, 1, 2],
                          "a": [1.0, 2, 3], "b": [1.0, 2, 2]})
    assert diary_from_frame(table, None, grid_settings).day_labels == ("mon", "tue")


def test_prompts_per_day_adds_missed_last_prompts(grid_table, grid_settings):
    table = grid_table(2, 4)
    assert diary_from_frame(table, None, grid_settings, prompts_per_day=6).n_occasions == 12
    with pytest.raises(DataError, match="beyond the 3 prompts per day"):
        diary_from_frame(table, None, grid_settings, prompts_per_day=3)


def test_prompts_numbered_from_zero(grid_settings):
    table = pd.DataFrame({"day": [1, 1], "prompt": [0, 2], "a": [1.0, 2], "b": [2.0, 1]})
    diary = diary_from_frame(table, None, grid_settings)
    assert diary.prompt.tolist() == [0, 1, 2]


def test_duplicate_day_prompt_names_both_rows(grid_table, grid_settings):
    table = grid_table(2, 3)
    table.loc[4, "prompt"] = 1  # day 2 now has prompt 1 at positions 3 and 4
    with pytest.raises(DataError) as caught:
        diary_from_frame(table, None, grid_settings, source="d.csv")
    message = str(caught.value)
    # positions 3 and 4 are rows 5 and 6 when the header is row 1
    assert message.startswith("d.csv: day 2, prompt 1 appears twice")
    assert "rows 5 and 6 (counting the header as row 1)" in message


def test_grid_needs_prompt_numbers(grid_settings):
    table = pd.DataFrame({"day": [1, 1], "prompt": [1, 1.5], "a": [1.0, 2], "b": [2.0, 1]})
    with pytest.raises(DataError, match=r"column 'prompt', row 3 .*'1.5' is not a prompt number"):
        diary_from_frame(table, None, grid_settings)
    table = pd.DataFrame({"day": [1, None], "prompt": [1, 2], "a": [1.0, 2], "b": [2.0, 1]})
    with pytest.raises(DataError, match=r"column 'day', row 3 .*: no day"):
        diary_from_frame(table, None, grid_settings)


# ---------------------------------------------------------------- timestamps and order

def test_timestamps_are_sorted_and_split_at_midnight():
    table = pd.DataFrame({
        "time": ["2024-03-02 09:00", "2024-03-01 20:00", "2024-03-01 08:00", "2024-03-02 13:00"],
        "a": [4.0, 2, 1, 5], "b": [1.0, 2, 3, 4],
    })
    diary = diary_from_frame(table, None, STAMPS)
    assert diary.values[:, 0].tolist() == [1.0, 2.0, 4.0, 5.0]
    assert diary.segment.tolist() == [0, 0, 1, 1]
    assert diary.day_labels == ("2024-03-01", "2024-03-02")
    assert diary.prompt.tolist() == [1, 2, 1, 2]
    assert diary.time.dtype == np.dtype("datetime64[ns]")
    joined = diary_from_frame(table, None, replace(STAMPS, days_independent=False))
    assert joined.segment.tolist() == [0, 0, 0, 0]


def test_timestamps_keep_local_time_across_a_clock_change():
    # Offsets change at the clock change; the calendar date is the local one.
    table = pd.DataFrame({"time": ["2024-03-30T23:30:00+01:00", "2024-03-31T09:00:00+02:00"],
                          "a": [1.0, 2], "b": [2.0, 1]})
    diary = diary_from_frame(table, None, STAMPS)
    assert diary.day_labels == ("2024-03-30", "2024-03-31")


def test_unparseable_timestamp_names_the_row():
    table = pd.DataFrame({"time": ["2024-03-01 08:00", "2024-03-01 10:00", "soon"],
                          "a": [1.0, 2, 3], "b": [1.0, 2, 2]})
    with pytest.raises(DataError, match=r"^d.csv, column 'time', row 4 \(counting the header "
                                        r"as row 1\): 'soon' is not a date and time$"):
        diary_from_frame(table, None, STAMPS, source="d.csv")


def test_order_mode_is_one_segment(grid_table):
    table = grid_table(2, 3)
    diary = diary_from_frame(table, ["calm", "tense"], TimeSettings())
    assert diary.segment.tolist() == [0] * 6 and diary.n_days == 1
    assert diary.values.tolist() == table[["calm", "tense"]].to_numpy().tolist()


# ---------------------------------------------------------------- items and cells

def test_items_default_to_numeric_columns_that_are_not_time(grid_settings):
    table = pd.DataFrame({"id": ["p1", "p1", "p1"], "day": [1, 1, 1], "prompt": [1, 2, 3],
                          "calm": [1.0, 2, 3], "tense": ["2", "3,5", ""], "empty": [None] * 3})
    diary = diary_from_frame(table, None, grid_settings)
    assert diary.items == ("calm", "tense")
    np.testing.assert_array_equal(diary.values[:, 1], [2.0, 3.5, np.nan])
    assert any("do not hold numbers: id" in w for w in diary.warnings)
    assert any("empty columns: empty" in w for w in diary.warnings)


def test_missing_codes_become_unanswered(grid_settings):
    table = pd.DataFrame({"day": [1, 1, 1], "prompt": [1, 2, 3], "a": [-99.0, 2, 999],
                          "b": ["refused", "1", "-99"]})
    diary = diary_from_frame(table, None, grid_settings, missing_codes=("-99", 999, "Refused"))
    np.testing.assert_array_equal(diary.values, [[np.nan, np.nan], [2, 1], [np.nan, np.nan]])


def test_non_numeric_item_cell_names_column_row_and_value(grid_table, grid_settings):
    table = grid_table(2, 3).astype({"tense": object})
    table.loc[4, "tense"] = "3a"
    with pytest.raises(DataError, match=r"^d.csv, column 'tense', row 6 \(counting the header "
                                        r"as row 1\): '3a' is not a number$"):
        diary_from_frame(table, ["calm", "tense"], grid_settings, source="d.csv")


def test_item_errors(grid_table, grid_settings):
    table = grid_table(2, 3)
    table["never"] = np.nan
    with pytest.raises(DataError, match="column 'never': the item has no answers"):
        diary_from_frame(table, ["calm", "never"], grid_settings)
    with pytest.raises(DataError, match="only one item column \\('calm'\\)"):
        diary_from_frame(table, ["calm"], grid_settings)
    with pytest.raises(DataError, match="no column named 'clam' \\(did you mean 'calm'\\?\\)"):
        diary_from_frame(table, ["clam", "tense"], grid_settings)
    with pytest.raises(DataError, match="no column named 'days'"):
        diary_from_frame(table, None, replace(grid_settings, day="days"))
    with pytest.raises(DataError, match="'day' is a time column"):
        diary_from_frame(table, ["day", "calm"], grid_settings)
    only_text = pd.DataFrame({"day": [1], "prompt": [1], "note": ["x"]})
    with pytest.raises(DataError, match="no item columns"):
        diary_from_frame(only_text, None, grid_settings)


def test_constant_and_sparse_items_are_warnings(grid_table, grid_settings):
    table = grid_table(2, 3)
    table["same"] = 4.0
    diary = diary_from_frame(table, None, grid_settings)
    assert "item 'same' has the same answer (4) every time it was answered" in diary.warnings
    assert "item 'calm' has only 6 answers" in diary.warnings
    plenty = diary_from_frame(grid_table(3, 5), None, grid_settings)
    assert plenty.warnings == ()


def test_load_diary_counts_rows_as_a_spreadsheet_does(tmp_path, grid_settings):
    # A blank line stays a row in a spreadsheet, so the bad cell is in row 4 of the file.
    path = tmp_path / "d.csv"
    path.write_text("day,prompt,a,b\n1,1,2,3\n\n1,2,x,3\n", encoding="utf-8")
    with pytest.raises(DataError, match=r"column 'a', row 4 \(counting the header as row 1\)"):
        load_diary(path, items=["a", "b"], time=grid_settings)
    path.write_text("day,prompt,a,b\n1,1,2,3\n\n1,3,2,3\n", encoding="utf-8")
    diary = load_diary(path, time=grid_settings)
    assert diary.n_occasions == 3 and diary.source == str(path)


# ---------------------------------------------------------------- any text: a Diary or our error

DELIMITERS = st.sampled_from([",", ";", "\t", "|"])
NOISE = st.sampled_from(["", "NA", "x", "day", "1e400", "\"", "nan", "é", " 7 ", "inf",
                         "2024-13-45", "-", "3;4", "1,5"])
CELLS = {
    "day": st.sampled_from(["1", "2", "3", "10", "2024-03-01", "31.03.2024", "mon"]),
    "prompt": st.sampled_from(["1", "2", "3", "0", "-1", "2.5", "6"]),
    "time": st.sampled_from(["2024-03-01 08:00", "2024-03-01 09:30", "2024-03-02 07:00",
                             "01.03.2024 10:00", "2024-03-01T11:00+01:00", "soon",
                             "9999-01-01 08:00"]),
}
ANSWERS = st.sampled_from(["1", "2", "3,5", "4.5", "-99", "", "NA", "7", "0"])
HEADERS = st.one_of(
    st.sampled_from([["day", "prompt", "a", "b"], ["time", "a", "b", "c"], ["a", "b"],
                     ["day", "prompt", "a", "b", "c"]]),
    st.lists(st.sampled_from(["day", "prompt", "time", "a", "b", "c", ""]), min_size=1,
             max_size=5),
)


@st.composite
def table_texts(draw) -> tuple[str, TimeSettings]:
    """Delimited tables that are mostly diaries, with some noise cells and ragged rows, and
    time settings that usually fit the header."""
    delim = draw(DELIMITERS)
    header = draw(HEADERS)
    answers = ANSWERS.filter(lambda cell: delim not in cell)
    day_format = draw(st.sampled_from(["{}", "2024-03-0{}", "0{}.03.2024"]))
    noisy = draw(st.booleans())  # clean tables should mostly give a diary
    lines = [delim.join(header)]
    for row in range(draw(st.integers(0, 12))):
        ordered = {"day": day_format.format(row // 4 + 1), "prompt": str(row % 4 + 1),
                   "time": f"2024-03-0{row // 4 + 1} {8 + 3 * (row % 4):02d}:00"}
        cells = [draw(NOISE) if noisy and draw(st.integers(0, 20)) == 0
                 else draw(CELLS[name]) if name in CELLS and noisy and draw(st.integers(0, 8)) == 0
                 else ordered[name] if name in ordered else draw(answers)
                 for name in header]
        if draw(st.integers(0, 60)) == 0:
            cells = cells[:-1] if draw(st.booleans()) else cells + [draw(answers)]
        lines.append(delim.join(cells))
    fitting = [mode for mode in MODES if set(mode.columns()) <= set(header)]
    mode = draw(st.sampled_from(fitting if draw(st.integers(0, 5)) else MODES))
    return "\n".join(lines), mode


MODES = [TimeSettings(), TimeSettings(mode="grid", day="day", prompt="prompt"),
         TimeSettings(mode="timestamp", time="time", max_gap_minutes=60)]
CASES = st.one_of(table_texts(), st.tuples(st.text(max_size=200), st.sampled_from(MODES)))


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(case=CASES, codes=st.sampled_from([(), ("-99",)]))
def test_any_csv_text_gives_a_diary_or_our_error(case, codes):
    text, mode = case
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "any.csv"
        path.write_text(text, encoding="utf-8")
        try:
            diary = load_diary(path, time=mode, missing_codes=codes)
        except LagwiseError as error:
            assert "\n" not in str(error)
            return
    assert isinstance(diary, Diary)
    assert diary.n_items >= 2 and diary.values.shape == (diary.n_occasions, diary.n_items)
    assert np.all(np.diff(diary.segment) >= 0)


@settings(max_examples=50, deadline=None)
@given(raw=st.binary(max_size=300))
def test_any_bytes_give_a_diary_or_our_error(raw):
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "any.csv"
        path.write_bytes(raw)
        try:
            load_diary(path)
        except LagwiseError:
            pass


def test_grid_with_times_and_spreadsheet_dates(tmp_path, grid_settings):
    # Excel stores the day as a date and the time as a date and time: days are sorted
    # chronologically and inserted prompts have no time.
    table = pd.DataFrame({
        "day": pd.to_datetime(["2024-03-02", "2024-03-01", "2024-03-01"]),
        "prompt": [1, 1, 3],
        "time": pd.to_datetime(["2024-03-02 09:00", "2024-03-01 08:00", "2024-03-01 16:00"]),
        "a": [1.0, 2, 3], "b": [3.0, 2, 2],
    })
    path = tmp_path / "d.xlsx"
    table.to_excel(path, index=False)
    diary = load_diary(path, time=replace(grid_settings, time="time"))
    assert diary.day_labels == ("2024-03-01", "2024-03-02")
    assert diary.items == ("a", "b")
    expected = ["2024-03-01T08:00", "NaT", "2024-03-01T16:00", "2024-03-02T09:00", "NaT", "NaT"]
    np.testing.assert_array_equal(diary.time, np.array(expected, dtype="datetime64[ns]"))


def test_spss_cells_are_named_by_case_number(tmp_path, grid_settings):
    table = pd.DataFrame({"day": [1.0, 1.0], "prompt": [1.0, 2.0], "a": [1.0, 2.0],
                          "b": ["3", "x"]})
    path = tmp_path / "d.sav"
    pyreadstat.write_sav(table, str(path))
    with pytest.raises(DataError, match=r"column 'b', case 2: 'x' is not a number$"):
        load_diary(path, items=["a", "b"], time=grid_settings)
