"""Readers: every file kind checked against pandas' own reader on the same file."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyreadstat
import pytest
from pandas.testing import assert_frame_equal

from lagwise.models.errors import DataError
from lagwise.models.readers import numeric_cells, read_table, sniff_format, time_cells


@pytest.fixture
def table() -> pd.DataFrame:
    """A small diary table with a missed prompt, a skipped item and fractional answers."""
    return pd.DataFrame({
        "day": [1, 1, 1, 2, 2],
        "prompt": [1, 2, 3, 1, 3],
        "calm": [3.5, 4.0, np.nan, 2.25, 5.0],
        "tense": [1.0, 2.0, 3.0, np.nan, 4.5],
    })


def ours(path) -> pd.DataFrame:
    return read_table(path).reset_index(drop=True)


@pytest.mark.parametrize("sep, decimal, name", [
    (",", ".", "comma.csv"),
    (";", ",", "semicolon.csv"),
    ("\t", ".", "tabs.tsv"),
    ("|", ".", "bars.txt"),
    ("\t", ",", "tabs_comma.txt"),
])
def test_delimited_text_matches_pandas(tmp_path, table, sep, decimal, name):
    path = tmp_path / name
    table.to_csv(path, sep=sep, decimal=decimal, index=False)
    expected = pd.read_csv(path, sep=sep, decimal=decimal)
    assert_frame_equal(ours(path), expected)
    assert ours(path)["calm"].dtype == np.float64  # the decimal comma was recognised


def test_text_encodings_match_pandas(tmp_path, table):
    renamed = table.rename(columns={"calm": "gelöst", "tense": "müde"})
    for encoding in ("utf-8", "utf-8-sig", "latin-1"):
        path = tmp_path / f"{encoding}.csv"
        renamed.to_csv(path, sep=";", decimal=",", index=False, encoding=encoding)
        expected = pd.read_csv(path, sep=";", decimal=",", encoding=encoding)
        assert_frame_equal(ours(path), expected)
        assert list(ours(path).columns) == ["day", "prompt", "gelöst", "müde"]


def test_excel_matches_pandas(tmp_path, table):
    path = tmp_path / "diary.xlsx"
    table.to_excel(path, index=False)
    assert_frame_equal(ours(path), pd.read_excel(path))
    assert read_table(path).index.tolist() == [2, 3, 4, 5, 6]  # spreadsheet rows


def test_spss_matches_pandas(tmp_path, table):
    path = tmp_path / "diary.sav"
    pyreadstat.write_sav(table, str(path), variable_value_labels={"calm": {1.0: "not at all"}})
    assert_frame_equal(ours(path), pd.read_spss(path, convert_categoricals=False))
    assert read_table(path).index.name == "case"


def test_stata_matches_pandas(tmp_path, table):
    path = tmp_path / "diary.dta"
    table.to_stata(path, write_index=False)
    assert_frame_equal(ours(path), pd.read_stata(path, convert_categoricals=False))


def test_missing_markers_are_empty(tmp_path):
    path = tmp_path / "d.csv"
    path.write_text("a,b\n1,NA\n,2\n3,\n", encoding="utf-8")
    assert_frame_equal(ours(path), pd.read_csv(path))
    assert ours(path).isna().sum().tolist() == [1, 2]


def test_rows_are_numbered_as_in_a_spreadsheet(tmp_path):
    # Header row 1; data rows 2 and 4; the blank line is row 3 and holds nothing.
    path = tmp_path / "d.csv"
    path.write_text("a,b\n1,2\n\n3,4\n", encoding="utf-8")
    frame = read_table(path)
    assert frame.index.tolist() == [2, 4] and frame.index.name == "row"


def test_sniffing():
    assert sniff_format("a;b\n1,5;2\n3;4,25\n") == (";", ",")
    assert sniff_format("a;b\n1.5;2\n3;4\n") == (";", ".")
    assert sniff_format("a,b\n1.5,2\n") == (",", ".")
    assert sniff_format("a\tb c\n1\t2\n") == ("\t", ".")
    assert sniff_format("only\n1\n") == (",", ".")


def test_numeric_cells_read_text_numbers():
    series = pd.Series(["1", " 2,5 ", "-3.25", "", "NA", "1e2", "x", "-99", "inf"])
    values, bad = numeric_cells(series, missing_codes=["-99"])
    np.testing.assert_array_equal(values, [1, 2.5, -3.25, np.nan, np.nan, 100, np.nan, np.nan,
                                           np.nan])
    assert bad.tolist() == [False] * 6 + [True, False, True]


def test_time_cells_against_pandas():
    texts = pd.Series(["2024-03-01 08:00", "2024-03-01 13:30:15", None])
    stamps, bad = time_cells(texts)
    expected = pd.to_datetime(texts, format="ISO8601").to_numpy(dtype="datetime64[ns]")
    np.testing.assert_array_equal(stamps, expected)
    assert not bad.any()
    # Day and month cannot be told apart when no day exceeds 12: refused, or read as told.
    dotted = pd.Series(["01.03.2024 08:00", "02.03.2024 09:00"])
    with pytest.raises(DataError, match="day or the month first"):
        time_cells(dotted)
    told, bad = time_cells(dotted, "%d.%m.%Y %H:%M")
    assert str(told[0])[:10] == "2024-03-01" and not bad.any()
    # Nanosecond times cover the years 1678 to 2261 (numpy datetime64[ns] range).
    far, bad = time_cells(pd.Series(["9999-01-01 08:00", "2024-03-01 08:00", "3"]))
    assert bad.tolist() == [True, False, True] and np.isnat(far[0])


@pytest.mark.parametrize("content, suffix, words", [
    (b"", ".csv", "the file is empty"),
    (b"  \n\n", ".csv", "the file is empty"),
    (b"a,b\n", ".csv", "a header but no data rows"),
    (b"\x00\x01\x02\xff\xfe\x00binary", ".csv", "cannot read the file as text"),
    (b"a,b\n1,2\n", ".json", "unknown kind of file '.json'"),
    (b"not a workbook", ".xlsx", "cannot read the file as an Excel workbook"),
    (b"not spss", ".sav", "cannot read the file as an SPSS data file"),
    (b"not stata", ".dta", "cannot read the file as a Stata data file"),
    (b"a,b\n1,2\n3,4,5\n", ".csv", "row 3 (counting the header as row 1) has 3 cells"),
    (b"a,b\n1,\"2\n", ".csv", "a quoted cell starting in row 2 is never closed"),
    (b"a,a \n1,2\n", ".csv", "'a' appears twice"),
])
def test_bad_files_give_one_line_messages(tmp_path, content, suffix, words):
    path = tmp_path / f"bad{suffix}"
    path.write_bytes(content)
    with pytest.raises(DataError) as caught:
        read_table(path)
    message = str(caught.value)
    assert message.startswith(str(path)) and words in message and "\n" not in message


def test_missing_file(tmp_path):
    with pytest.raises(DataError, match="no such file"):
        read_table(tmp_path / "nothing.csv")
