"""Reading diary files into a raw table, and reading table cells as numbers and times.

Supported files: delimited text (.csv, .tsv, .txt, .dat; the delimiter is detected among
comma, semicolon, tab and bar, and a decimal comma is detected), Excel workbooks (.xlsx,
.xlsm; the first sheet), SPSS (.sav, .zsav) and Stata (.dta). Text is decoded as UTF-8,
UTF-8 with a byte-order mark (or UTF-16 with one), then Latin-1. Delimited text is read by
pandas from the file in chunks; a text column of plain ISO 8601 date-times (no UTC offset)
becomes a datetime column as it is read. A column name given twice is refused.

The table returned by `read_table` is indexed by where each row sits in the file, so that
messages can point at it: index name "row" means file rows counted the way a spreadsheet
shows them (the header is row 1, the first data row is row 2); "case" means case numbers
(1, 2, ...) of an SPSS or Stata file. Rows with no value at all are dropped.
"""

from __future__ import annotations

import codecs
import csv
import datetime as dt
import io
import math
import re
import warnings
from pathlib import Path
from typing import Iterable

import numpy as np
import pandas as pd
from pandas.tseries.api import guess_datetime_format

from lagwise.models.errors import DataError

TEXT_SUFFIXES = (".csv", ".tsv", ".txt", ".dat")
EXCEL_SUFFIXES = (".xlsx", ".xlsm")
SPSS_SUFFIXES = (".sav", ".zsav")
STATA_SUFFIXES = (".dta",)
SUPPORTED_SUFFIXES = TEXT_SUFFIXES + EXCEL_SUFFIXES + SPSS_SUFFIXES + STATA_SUFFIXES

DELIMITERS = ("\t", ";", "|", ",")  # preference order when several split the file equally well
DELIMITER_NAMES = {",": "comma", ";": "semicolon", "\t": "tab", "|": "bar"}
SNIFF_LINES = 200
CHUNK_ROWS = 100_000  # rows pandas reads at a time

# Cell texts read as "no answer" (compared after stripping spaces, case-insensitive).
MISSING_TEXTS = frozenset({"", "na", "n/a", "nan", "null", "none", "#n/a", "."})

_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?")
_DECIMAL_COMMA = re.compile(r"[+-]?(?:\d+,\d*|,\d+)(?:[eE][+-]?\d+)?")
_DATE_SHAPE = re.compile(r"\d{1,4}[-./]\d{1,2}[-./]\d{1,4}(?:[ T].*)?")
_UTC_OFFSET = re.compile(r"(\d{1,2}:\d{2}(?::\d{2}(?:\.\d+)?)?)\s*(?:Z|[+-]\d{2}(?::?\d{2})?)$")
_OFFSET = re.compile(r"\d{1,2}:\d{2}(?::\d{2}(?:\.\d+)?)?\s*(Z|[+-]\d{2}(?::?\d{2})?)$")
_ISO_LOCAL = re.compile(r"\d{4}-\d{2}-\d{2}[ T]\d{2}:\d{2}(?::\d{2}(?:\.\d{1,6})?)?")
_BAD_CONTROL = re.compile(r"[\x00-\x08\x0e-\x1f\x7f]")
_PANDAS_FIELDS = re.compile(r"Expected (\d+) fields in line (\d+), saw (\d+)")
_FIRST_TIME = np.datetime64("1678-01-01", "us")
_LAST_TIME = np.datetime64("2261-12-31", "us")
_PANDAS_QUOTE = re.compile(r"EOF inside string starting at row (\d+)")


def read_table(path: str | Path, columns: Iterable[str] | None = None) -> pd.DataFrame:
    """The raw table of a diary file, indexed by file row ("row") or case number ("case").

    `columns`: read only these (delimited text; when the header holds them all), which keeps
    the memory of a long file down. A column name that appears twice is refused.
    """
    path = Path(path)
    name = str(path)
    if not path.exists():
        raise DataError(f"{name}: no such file")
    if path.is_dir():
        raise DataError(f"{name}: is a folder, not a data file")
    suffix = path.suffix.lower()
    if suffix not in SUPPORTED_SUFFIXES:
        raise DataError(
            f"{name}: unknown kind of file '{path.suffix or '(no extension)'}'; "
            f"Lagwise reads {', '.join(SUPPORTED_SUFFIXES)}"
        )
    if suffix not in TEXT_SUFFIXES and not path.read_bytes().strip():
        raise DataError(f"{name}: the file is empty")
    if suffix in TEXT_SUFFIXES:
        frame = _read_text(path, name, columns)
    elif suffix in EXCEL_SUFFIXES:
        header = _read_binary(path, name, "an Excel workbook", lambda p: pd.read_excel(
            p, sheet_name=0, engine="openpyxl", header=None, nrows=1))
        refuse_repeated_names([str(c) for c in header.iloc[0]] if len(header) else [], name)
        frame = _read_binary(path, name, "an Excel workbook",
                             lambda p: pd.read_excel(p, sheet_name=0, engine="openpyxl"))
        frame.index = pd.RangeIndex(2, 2 + len(frame), name="row")
    elif suffix in SPSS_SUFFIXES:
        frame = _read_binary(path, name, "an SPSS data file",
                             lambda p: pd.read_spss(p, convert_categoricals=False))
        frame.index = pd.RangeIndex(1, 1 + len(frame), name="case")
    else:
        frame = _read_binary(path, name, "a Stata data file",
                             lambda p: pd.read_stata(p, convert_categoricals=False))
        frame.index = pd.RangeIndex(1, 1 + len(frame), name="case")
    return _tidy(frame, name)


def text_encoding(path: Path, name: str) -> str:
    """The encoding of a text file: UTF-8, UTF-8 with a byte-order mark, then Latin-1 (UTF-16
    with a mark). The file is checked a block at a time, so a long file is never held whole."""
    with open(path, "rb") as handle:
        start = handle.read(3)
    if start.startswith((b"\xff\xfe", b"\xfe\xff")):
        attempts = ("utf-16",)
    elif start.startswith(b"\xef\xbb\xbf"):
        attempts = ("utf-8-sig",)
    else:
        attempts = ("utf-8", "latin-1")
    for encoding in attempts:
        if _decodes(path, encoding):
            return encoding
    raise DataError(
        f"{name}: cannot read the file as text (tried UTF-8, UTF-8 with BOM and Latin-1); "
        "is it a spreadsheet or another binary file with a text extension?"
    )


def _decodes(path: Path, encoding: str) -> bool:
    """True when the whole file decodes as `encoding` without control characters."""
    decoder = codecs.getincrementaldecoder(encoding)()
    with open(path, "rb") as handle:
        try:
            for block in iter(lambda: handle.read(1 << 22), b""):
                if _BAD_CONTROL.search(decoder.decode(block)):
                    return False
            return not _BAD_CONTROL.search(decoder.decode(b"", final=True))
        except UnicodeDecodeError:
            return False


def sniff_format(text: str) -> tuple[str, str]:
    """(delimiter, decimal mark) of delimited text.

    The delimiter is the candidate that splits the header into 2 or more columns and gives
    the most sample lines the header's number of cells. A decimal comma is assumed when, with
    a delimiter other than comma, some cells look like 3,5 and none like 3.5.
    """
    lines = [line for line in text.splitlines() if line.strip()][:SNIFF_LINES]
    best, best_score = ",", (-1.0, 0)
    for rank, delim in enumerate(reversed(DELIMITERS)):
        rows = _split_lines(lines, delim)
        if not rows or len(rows[0]) < 2:
            continue
        width = len(rows[0])
        body = rows[1:]
        agree = sum(len(r) == width for r in body) / len(body) if body else 1.0
        if (agree, rank) > best_score:
            best, best_score = delim, (agree, rank)
    decimal = "."
    if best != ",":
        cells = [c.strip() for row in _split_lines(lines[1:], best) for c in row]
        commas = sum(bool(_DECIMAL_COMMA.fullmatch(c)) for c in cells)
        points = sum(bool(_NUMBER.fullmatch(c)) and "." in c for c in cells)
        if commas and not points:
            decimal = ","
    return best, decimal


def parse_missing_codes(codes: Iterable[object]) -> tuple[tuple[float, ...], tuple[str, ...]]:
    """Split user missing-value codes into numbers (-99) and texts ('refused')."""
    numbers: list[float] = []
    texts: list[str] = []
    for code in codes:
        if isinstance(code, (int, float, np.number)) and not isinstance(code, bool):
            numbers.append(float(code))
            continue
        text = str(code).strip()
        if not text:
            continue
        number = _as_number(text)
        if number is None:
            texts.append(text.lower())
        else:
            numbers.append(number)
    return tuple(numbers), tuple(texts)


def numeric_cells(series: pd.Series,
                  missing_codes: Iterable[object] = ()) -> tuple[np.ndarray, np.ndarray]:
    """(values, bad): a column as floats (NaN = missing) and a mask of cells that are not numbers.

    Empty cells, NA-like texts and the user's missing-value codes become NaN. Text cells are
    numbers when they read as 3, -2.5, 1e3 or with a decimal comma (2,5); infinities are not.
    """
    number_codes, text_codes = parse_missing_codes(missing_codes)
    n = len(series)
    bad = np.zeros(n, dtype=bool)
    if pd.api.types.is_numeric_dtype(series.dtype):  # numbers and booleans
        values = series.to_numpy(dtype=float, na_value=np.nan, copy=True)
    else:
        values = np.full(n, np.nan)
        for i, cell in enumerate(series.to_numpy(dtype=object)):
            value = _cell_number(cell, text_codes)
            if value is None:
                bad[i] = True
            else:
                values[i] = value
    inf = np.isinf(values)
    bad |= inf
    values[inf] = np.nan
    for code in number_codes:
        values[values == code] = np.nan
    return values, bad


def time_cells(series: pd.Series, date_format: str | None = None
               ) -> tuple[np.ndarray, np.ndarray]:
    """(times, bad): a column as datetime64[ns] wall-clock times (NaT = empty).

    With `date_format` (a strftime format) text is read with that format only. Otherwise text
    is tried as ISO 8601 and in the formats guessed from its first cells (month-first and
    day-first); the reading with fewest failures wins, and DataError is raised when a
    month-first and a day-first reading both fit every cell (the data cannot tell them
    apart). Offsets such as +02:00 are left out here so that times stay local
    (`utc_offsets` reads them).
    """
    n = len(series)
    if pd.api.types.is_datetime64_any_dtype(series.dtype):
        stamps = pd.DatetimeIndex(series)
        if stamps.tz is not None:
            stamps = stamps.tz_localize(None)
        out, outside = _in_nanoseconds(stamps.to_numpy())
        return out, outside
    if _all_text(series):
        return _text_times(series, date_format)
    cells = series.to_numpy(dtype=object)
    texts: list[str | None] = []
    fixed: dict[int, pd.Timestamp] = {}
    bad = np.zeros(n, dtype=bool)
    for i, cell in enumerate(cells):
        if isinstance(cell, (dt.datetime, dt.date, np.datetime64)) and not pd.isna(cell):
            stamp = pd.Timestamp(cell)
            fixed[i] = stamp.tz_localize(None) if stamp.tz is not None else stamp
            texts.append(None)
        elif is_missing_cell(cell):
            texts.append(None)
        elif _could_be_time(cell):
            texts.append(_UTC_OFFSET.sub(r"\1", cell.strip()))
        else:
            texts.append(None)
            bad[i] = True
    parsed = _parse_texts(pd.Series(texts, dtype=object), date_format)
    micro = parsed.to_numpy().astype("datetime64[us]")
    for i, stamp in fixed.items():
        micro[i] = stamp.to_datetime64()
    out, outside = _in_nanoseconds(micro)
    bad |= outside | (np.array([t is not None for t in texts]) & np.isnat(out))
    return out, bad


def _text_times(series: pd.Series, date_format: str | None) -> tuple[np.ndarray, np.ndarray]:
    """`time_cells` of a column holding text only, with pandas' string methods."""
    stripped = series.str.strip()
    missing = missing_cells(series)
    bad = ~missing & (stripped.str.fullmatch(_NUMBER.pattern).fillna(False).to_numpy(bool)
                      | ~stripped.str.contains(r"\d").fillna(False).to_numpy(bool))
    texts = stripped.str.replace(_UTC_OFFSET.pattern, r"\1", regex=True).where(~(missing | bad))
    del stripped
    parsed = _parse_texts(texts, date_format)
    out, outside = _in_nanoseconds(parsed.to_numpy().astype("datetime64[us]"))
    bad |= outside | (texts.notna().to_numpy() & np.isnat(out))
    return out, bad


def missing_cells(series: pd.Series) -> np.ndarray:
    """`is_missing_cell` of every cell, vectorised for numbers, dates and text columns."""
    if (pd.api.types.is_numeric_dtype(series.dtype)
            or pd.api.types.is_datetime64_any_dtype(series.dtype)):
        return series.isna().to_numpy(dtype=bool)
    if _all_text(series):
        stripped = series.str.strip()
        short = stripped.where(stripped.str.len() <= max(map(len, MISSING_TEXTS)))
        return (series.isna() | short.str.lower().isin(MISSING_TEXTS)).to_numpy(dtype=bool)
    return np.array([is_missing_cell(c) for c in series.to_numpy(dtype=object)], dtype=bool)


def _all_text(series: pd.Series) -> bool:
    """True for a column whose cells are all text or empty (pandas' string methods apply)."""
    return (isinstance(series.dtype, pd.StringDtype)
            or (series.dtype == object and pd.api.types.infer_dtype(series) == "string"))


def utc_offsets(series: pd.Series) -> np.ndarray:
    """Minutes east of UTC written with each time (+02:00, -0500, Z); NaN where none."""
    if _all_text(series):
        written = series.str.strip().str.extract(_OFFSET.pattern, expand=False)
        found = written.dropna().unique()
        return written.map({w: _offset_minutes(w) for w in found}).to_numpy(dtype=float)
    if pd.api.types.is_datetime64_any_dtype(series.dtype):
        stamps = pd.DatetimeIndex(series)
        if stamps.tz is None:
            return np.full(len(series), np.nan)
        local = stamps.tz_localize(None).to_numpy()
        instant = stamps.tz_convert("UTC").tz_localize(None).to_numpy()
        return ((local - instant) / np.timedelta64(1, "m")).astype(float)
    out = np.full(len(series), np.nan)
    for i, cell in enumerate(series.to_numpy(dtype=object)):
        if isinstance(cell, str):
            match = _OFFSET.search(cell.strip())
            if match:
                out[i] = _offset_minutes(match.group(1))
        elif isinstance(cell, dt.datetime) and cell.utcoffset() is not None:
            out[i] = cell.utcoffset().total_seconds() / 60
    return out


def _offset_minutes(text: str) -> float:
    if text == "Z":
        return 0.0
    digits = text[1:].replace(":", "")
    minutes = int(digits[:2]) * 60 + int(digits[2:] or 0)
    return float(-minutes if text[0] == "-" else minutes)


def looks_like_dates(series: pd.Series) -> bool:
    """True for a date/time column or text cells all shaped like dates (2024-03-01, 1.3.2024)."""
    if pd.api.types.is_datetime64_any_dtype(series.dtype):
        return True
    cells = [c for c in series.to_numpy(dtype=object) if not is_missing_cell(c)]
    return bool(cells) and all(
        isinstance(c, (dt.date, np.datetime64))
        or (isinstance(c, str) and _DATE_SHAPE.fullmatch(c.strip()) is not None)
        for c in cells
    )


def where(frame: pd.DataFrame, *positions: int) -> str:
    """Words locating rows (0-based positions) of a table for a message: 'row 5 (...)'."""
    if frame.index.name == "case":
        labels = [str(frame.index[p]) for p in positions]
        noun, note = "case", ""
    else:
        if frame.index.name == "row":
            labels = [str(frame.index[p]) for p in positions]
        else:
            labels = [str(p + 2) for p in positions]
        noun, note = "row", " (counting the header as row 1)"
    if len(labels) == 1:
        return f"{noun} {labels[0]}{note}"
    return f"{noun}s {', '.join(labels[:-1])} and {labels[-1]}{note}"


def show_cell(cell: object) -> str:
    """A cell as the user typed it, shortened for a one-line message."""
    text = str(cell).replace("\n", " ").replace("\r", " ")
    return repr(text if len(text) <= 40 else text[:37] + "...")


# ----------------------------------------------------------------------------------------

def refuse_repeated_names(header: list[str], name: str) -> None:
    """DataError naming the positions (1 = first column) of a column name given twice."""
    seen: dict[str, int] = {}
    for position, column in enumerate(header, start=1):
        column = str(column).strip()
        if column in seen:
            raise DataError(f"{name}: the column name '{column}' appears twice in the header "
                            f"(columns {seen[column]} and {position}); rename one of them")
        seen[column] = position


def _read_text(path: Path, name: str, columns: Iterable[str] | None = None) -> pd.DataFrame:
    """Delimited text, read by pandas straight from the file (never held as one string)."""
    encoding = text_encoding(path, name)
    with open(path, encoding=encoding, newline="") as handle:
        skipped = 0
        for line in handle:  # leading blank lines
            if line.strip():
                break
            skipped += 1
        else:
            raise DataError(f"{name}: the file is empty")
        head = line + handle.read(1 << 20)
    delim, decimal = sniff_format(head)
    header = next(csv.reader(io.StringIO(head, newline=""), delimiter=delim), [])
    refuse_repeated_names(header, name)
    _check_row_widths(path, encoding, delim, name, skipped)
    wanted = None if columns is None else set(columns)
    names = [c.strip() for c in header]
    usecols = None
    if wanted is not None and wanted <= set(names):
        usecols = [i for i, c in enumerate(names) if c in wanted]
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", pd.errors.ParserWarning)
            parts = [_compact_times(chunk) for chunk in pd.read_csv(
                path, encoding=encoding, skiprows=skipped, sep=delim, decimal=decimal,
                index_col=False, skip_blank_lines=False, usecols=usecols,
                chunksize=CHUNK_ROWS)]
        frame = pd.concat(parts, ignore_index=True) if len(parts) > 1 else parts[0]
    except (pd.errors.ParserError, pd.errors.EmptyDataError, ValueError) as error:
        detail = _pandas_message(error, skipped)
        raise DataError(f"{name}: cannot read the table: {detail}") from error
    frame.index = pd.RangeIndex(2 + skipped, 2 + skipped + len(frame), name="row")
    return frame


def _compact_times(chunk: pd.DataFrame) -> pd.DataFrame:
    """Text columns of plain ISO 8601 date-times (no UTC offset) as datetime64: a long diary's
    time column then never exists as millions of strings at once."""
    for column in chunk.columns:
        cells = chunk[column]
        if not _all_text(cells) or cells.isna().all():
            continue
        if cells.dropna().str.fullmatch(_ISO_LOCAL.pattern).all():
            try:
                chunk[column] = pd.to_datetime(cells, format="ISO8601")
            except (ValueError, OverflowError):  # an impossible date: time_cells names it
                continue
    return chunk


def _check_row_widths(path: Path, encoding: str, delim: str, name: str, skipped: int) -> None:
    """A row with more (non-empty) cells than the header has columns is an error."""
    width = None
    record = 0
    with open(path, encoding=encoding, newline="") as handle:
        for _ in range(skipped):
            handle.readline()
        try:
            for record, row in enumerate(csv.reader(handle, delimiter=delim), start=1 + skipped):
                if width is None:
                    width = len(row)
                elif len(row) > width and any(c.strip() for c in row[width:]):
                    raise DataError(
                        f"{name}: row {record} (counting the header as row 1) has {len(row)} "
                        f"cells but the header has {width} columns "
                        f"({DELIMITER_NAMES[delim]}-separated)")
        except csv.Error as error:
            raise DataError(f"{name}: cannot read row {record + 1}: {error}") from error


def _pandas_message(error: Exception, skipped: int) -> str:
    message = " ".join(str(error).split())
    match = _PANDAS_FIELDS.search(message)
    if match:
        expected, line, saw = match.groups()
        return (f"row {int(line) + skipped} has {saw} cells but the header has {expected} "
                "columns")
    match = _PANDAS_QUOTE.search(message)
    if match:
        return f"a quoted cell starting in row {int(match.group(1)) + 1 + skipped} is never closed"
    return message.replace("Error tokenizing data. C error: ", "")


def _read_binary(path: Path, name: str, kind: str, reader) -> pd.DataFrame:
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            frame = reader(path)
    except Exception as error:  # third-party readers raise many types for a damaged file
        detail = " ".join(str(error).split()) or type(error).__name__
        raise DataError(f"{name}: cannot read the file as {kind} ({detail})") from error
    return frame


def _tidy(frame: pd.DataFrame, name: str) -> pd.DataFrame:
    refuse_repeated_names(list(frame.columns), name)
    frame.columns = [str(c).strip() for c in frame.columns]
    if frame.shape[1] == 0:
        raise DataError(f"{name}: the file has no columns")
    frame = drop_empty_rows(frame)
    if len(frame) == 0:
        raise DataError(f"{name}: the file has a header but no data rows")
    return frame


def drop_empty_rows(frame: pd.DataFrame) -> pd.DataFrame:
    """The rows of `frame` holding some value (the same frame, not a copy, when all do)."""
    empty = frame.isna().all(axis=1).to_numpy()
    return frame.loc[~empty] if empty.any() else frame


def _split_lines(lines: list[str], delim: str) -> list[list[str]]:
    try:
        return list(csv.reader(lines, delimiter=delim))
    except csv.Error:
        return []


def _as_number(text: str) -> float | None:
    if _NUMBER.fullmatch(text):
        return float(text)
    if _DECIMAL_COMMA.fullmatch(text):
        return float(text.replace(",", "."))
    return None


def is_missing_cell(cell: object) -> bool:
    """True for an empty cell: NaN/None/NaT or an NA-like text ('', 'NA', 'n/a', '.', ...)."""
    if cell is None:
        return True
    if isinstance(cell, str):
        return cell.strip().lower() in MISSING_TEXTS
    try:
        return bool(pd.isna(cell))
    except (TypeError, ValueError):
        return False


def _cell_number(cell: object, text_codes: tuple[str, ...]) -> float | None:
    """The number in a cell, NaN for missing, None when it is not a number."""
    if isinstance(cell, str):
        text = cell.strip()
        if text.lower() in MISSING_TEXTS or text.lower() in text_codes:
            return math.nan
        return _as_number(text)
    if is_missing_cell(cell):
        return math.nan
    if isinstance(cell, (bool, np.bool_, int, float, np.number)):
        return float(cell)
    return None


def _in_nanoseconds(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """datetime64[ns] values and a mask of those outside its range (years 1678-2261: NaT)."""
    micro = np.asarray(values).astype("datetime64[us]")
    outside = (micro < _FIRST_TIME) | (micro > _LAST_TIME)
    micro[outside] = np.datetime64("NaT")
    return micro.astype("datetime64[ns]"), outside


def _could_be_time(cell: object) -> bool:
    """Text with a digit that is not a plain number (a bare 3 is never read as a date)."""
    return (isinstance(cell, str) and re.search(r"\d", cell) is not None
            and _NUMBER.fullmatch(cell.strip()) is None)


def _parse_texts(texts: pd.Series, date_format: str | None) -> pd.Series:
    """Parse date/time texts with `date_format`, or with the reading that fails least (see
    `time_cells`)."""
    present = texts.dropna()
    empty = pd.Series(pd.NaT, index=texts.index, dtype="datetime64[ns]")
    if present.empty:
        return empty
    if date_format:
        fmt = date_format.replace("%z", "").replace("%Z", "").strip()
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                return pd.to_datetime(texts, format=fmt, errors="coerce")
        except (ValueError, TypeError, OverflowError) as error:
            raise DataError(f"the date format {date_format!r} cannot be used ({error})") from None
    formats: list[str] = ["ISO8601"]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for sample in present.iloc[:1000].drop_duplicates().iloc[:20]:
            for dayfirst in (False, True):
                guessed = guess_datetime_format(sample, dayfirst=dayfirst)
                if guessed and guessed not in formats and not _year_day_month(guessed):
                    formats.append(guessed)
    readings = []
    for fmt in formats:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            try:
                parsed = pd.to_datetime(texts, format=fmt, errors="coerce")
            except (ValueError, TypeError, OverflowError):
                continue
        failures = int(parsed[present.index].isna().sum())
        readings.append((failures, fmt, parsed))
    if not readings:
        return empty
    fewest = min(r[0] for r in readings)
    best = [r for r in readings if r[0] == fewest]
    distinct = [r for r in best if not r[2].equals(best[0][2])]
    if distinct:
        shown = " or ".join(repr(f) for f in dict.fromkeys(r[1] for r in best if r[1] != "ISO8601"))
        raise DataError(f"dates such as {show_cell(present.iloc[0])} could be read with the day "
                        f"or the month first; give the date format ({shown})")
    return best[0][2]


def _year_day_month(fmt: str) -> bool:
    """A guessed format with the year first and the day before the month: never used."""
    return fmt.startswith("%Y") and _day_first(fmt)


def _day_first(fmt: str) -> bool:
    return "%d" in fmt and "%m" in fmt and fmt.index("%d") < fmt.index("%m")
