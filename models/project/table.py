"""The raw table of a project as JSON, and back (the `data.table` object of the format).

`table_to_json` writes each column with its kind (integer, number, boolean, datetime, text,
mixed) and the rows' original labels; `table_from_json` reads it back to the same pandas
dtypes, checking every cell's type and the table's size (MAX_ROWS x MAX_COLUMNS).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from lagwise.models import jsonread as jr
from lagwise.models.errors import FieldError, ProjectError
from lagwise.models.project.document import damage

MAX_ROWS = 5_000_000               # rows of the embedded table
MAX_COLUMNS = jr.MAX_ITEMS         # columns of the embedded table
TABLE_KINDS = ("integer", "number", "boolean", "datetime", "text", "mixed")


def table_to_json(frame: pd.DataFrame) -> dict:
    """A raw table as {"columns": [{"name", "kind"}], "row_labels", "rows"} (see the format doc)."""
    columns, cells = [], []
    for position in range(frame.shape[1]):
        kind, values = _column_to_json(frame.iloc[:, position])
        columns.append({"name": str(frame.columns[position]), "kind": kind})
        cells.append(values)
    labels = None
    if pd.api.types.is_integer_dtype(frame.index.dtype):
        name = frame.index.name if isinstance(frame.index.name, str) else None
        labels = {"name": name, "values": [int(v) for v in frame.index]}
    rows = [list(row) for row in zip(*cells)] if cells else []
    return {"columns": columns, "row_labels": labels, "rows": rows}


def _column_to_json(series: pd.Series) -> tuple[str, list]:
    dtype = series.dtype
    missing = series.isna().to_numpy()
    if dtype == object:
        return "mixed", [_cell_to_json(v) for v in series.to_numpy(dtype=object)]
    if pd.api.types.is_bool_dtype(dtype):
        return "boolean", [None if m else bool(v) for v, m in zip(series.to_numpy(object), missing)]
    if pd.api.types.is_integer_dtype(dtype):
        return "integer", [None if m else int(v) for v, m in zip(series.to_numpy(object), missing)]
    if pd.api.types.is_float_dtype(dtype):
        values = series.to_numpy(dtype=float, na_value=np.nan)
        if np.isinf(values).any():  # kept as text so the diary reader still refuses them
            return "mixed", [_cell_to_json(v) for v in values]
        return "number", [None if m else float(v) for v, m in zip(values, np.isnan(values))]
    if pd.api.types.is_datetime64_any_dtype(dtype):
        stamps = pd.DatetimeIndex(series)
        if stamps.tz is not None:  # wall-clock times, as models.readers.time_cells reads them
            stamps = stamps.tz_localize(None)
        return "datetime", [None if pd.isna(v) else v.isoformat() for v in stamps]
    if pd.api.types.is_string_dtype(dtype):
        return "text", [None if m else str(v) for v, m in zip(series.to_numpy(object), missing)]
    return "mixed", [_cell_to_json(v) for v in series.to_numpy(dtype=object)]


def _cell_to_json(cell: object) -> object:
    """A cell of a mixed column as a JSON value (dates as ISO 8601 text)."""
    if cell is None or isinstance(cell, str):
        return cell
    if isinstance(cell, (bool, np.bool_)):
        return bool(cell)
    if isinstance(cell, (int, np.integer)):
        return int(cell) if abs(int(cell)) <= jr.MAX_INTEGER else str(cell)
    if isinstance(cell, (float, np.floating)):
        if np.isnan(cell):
            return None
        return float(cell) if np.isfinite(cell) else str(float(cell))
    try:
        if pd.isna(cell):
            return None
    except (TypeError, ValueError):
        pass
    if hasattr(cell, "isoformat"):
        return cell.isoformat()
    return str(cell)


def table_from_json(doc: object, where: str = "table") -> pd.DataFrame:
    """The table written by `table_to_json` (raises ProjectError for anything else)."""
    try:
        return parse_table(doc, where)
    except FieldError as problem:
        raise ProjectError(damage(problem)) from None


def parse_table(doc: object, where: str) -> pd.DataFrame:
    """The table at `where` of a document; FieldError names a bad field."""
    doc = jr.obj(doc, where, ("columns", "row_labels", "rows"))
    columns = jr.array(doc["columns"], f"{where}.columns", MAX_COLUMNS)
    names, kinds = [], []
    for i, entry in enumerate(columns):
        at = f"{where}.columns[{i}]"
        entry = jr.obj(entry, at, ("name", "kind"))
        names.append(jr.text(entry["name"], f"{at}.name"))
        kinds.append(jr.choice(entry["kind"], f"{at}.kind", TABLE_KINDS))
    if len(set(names)) != len(names):
        raise FieldError(f"{where}.columns", "names a column twice")
    rows = jr.array(doc["rows"], f"{where}.rows", MAX_ROWS)
    width = len(names)
    for r, row in enumerate(rows):
        if not isinstance(row, list) or len(row) != width:
            raise FieldError(f"{where}.rows[{r}]", f"should be a list of {width} cells")
    series = {}
    for c, (name, kind) in enumerate(zip(names, kinds)):
        cells = [row[c] for row in rows]
        series[name] = _column_from_json(cells, kind, f"{where}.rows[*][{c}]")
    frame = pd.DataFrame(series, columns=names) if names else pd.DataFrame(index=range(len(rows)))
    labels = doc["row_labels"]
    if labels is not None:
        labels = jr.obj(labels, f"{where}.row_labels", ("name", "values"))
        name = jr.text(labels["name"], f"{where}.row_labels.name", null=True)
        values = jr.array(labels["values"], f"{where}.row_labels.values", MAX_ROWS)
        if len(values) != len(rows):
            raise FieldError(f"{where}.row_labels.values", f"should hold {len(rows)} row numbers")
        for i, value in enumerate(values):
            jr.integer(value, f"{where}.row_labels.values[{i}]")
        frame.index = pd.Index(np.array(values, dtype=np.int64), name=name)
    return frame


_CELL_TYPES: dict[str, tuple[type, ...]] = {
    "integer": (int,), "number": (int, float), "boolean": (bool,), "datetime": (str,),
    "text": (str,), "mixed": (str, int, float, bool),
}


def _column_from_json(cells: list, kind: str, where: str) -> pd.Series:
    allowed = _CELL_TYPES[kind]
    for cell in cells:
        if cell is None:
            continue
        if not isinstance(cell, allowed) or (isinstance(cell, bool) and bool not in allowed):
            raise FieldError(where, f"should hold {kind} cells, not {jr.kind(cell)}")
        if isinstance(cell, str) and len(cell) > jr.MAX_NAME:
            raise FieldError(where, f"holds a cell longer than {jr.MAX_NAME} characters")
    has_missing = any(cell is None for cell in cells)
    if kind == "integer":
        if has_missing:
            return pd.Series([np.nan if c is None else float(c) for c in cells], dtype=float)
        return pd.Series(cells, dtype=np.int64)
    if kind == "number":
        return pd.Series([np.nan if c is None else float(c) for c in cells], dtype=float)
    if kind == "boolean":
        return pd.Series(cells, dtype=object if has_missing else bool)
    if kind == "datetime":
        try:
            return pd.Series(pd.to_datetime(pd.Series(cells, dtype=object), format="ISO8601"))
        except (ValueError, TypeError, OverflowError) as error:
            raise FieldError(where, f"holds a cell that is not an ISO 8601 time ({error})") from None
    if kind == "text" and any(isinstance(c, str) for c in cells):
        return pd.Series(cells)  # the string type pandas gives text columns of a data file
    return pd.Series(cells, dtype=object)
