"""Qt table models over a FitResult.

Every cell shows a number taken from the FitResult as `models.numbers.fmt` writes it (the
formatter the report and the command line use too); nothing is computed
here. The display text is what the user sees and what CSV export writes; `SORT_ROLE`
holds the raw value so that sorting is numeric.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from PySide6.QtCore import QAbstractTableModel, QModelIndex, QPersistentModelIndex, Qt
from PySide6.QtGui import QBrush, QColor

from lagwise.desktop.results.palette import tint
from lagwise.models.kinds import Kind
from lagwise.models.numbers import fmt
from lagwise.models.results import FitResult, Parameter

SORT_ROLE = Qt.ItemDataRole.UserRole + 1
_DISPLAY = Qt.ItemDataRole.DisplayRole
_ALIGNMENT = Qt.ItemDataRole.TextAlignmentRole
_RECORD_ROLES = frozenset((_DISPLAY, SORT_ROLE, _ALIGNMENT))
_LEFT = int(Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignVCenter)
_RIGHT = int(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)


@dataclass(frozen=True)
class Column:
    """One table column: header, how to read the value from a row, and its number style.

    style "text" shows the value as it is (left-aligned), "figure" a number already written
    by `fmt` (right-aligned); other styles go through `fmt`.
    """

    header: str
    value: Callable[[Any], Any]
    style: str = "number"
    tip: str = ""


class RecordsModel(QAbstractTableModel):
    """Read-only table of records (one per row) shown through a list of Columns."""

    def __init__(self, columns: Sequence[Column], rows: Sequence[Any] = (), parent=None):
        super().__init__(parent)
        self._columns = tuple(columns)
        self._rows: tuple[Any, ...] = tuple(rows)
        self._shown: dict[tuple[int, int], str] = {}  # display texts, asked for on every paint

    def set_rows(self, rows: Sequence[Any]) -> None:
        self.beginResetModel()
        self._rows = tuple(rows)
        self._shown = {}
        self.endResetModel()

    def row_record(self, row: int) -> Any:
        return self._rows[row]

    def column(self, col: int) -> Column:
        return self._columns[col]

    def column_of(self, header: str) -> int:
        return [c.header for c in self._columns].index(header)

    def raw(self, row: int, col: int) -> Any:
        return self._columns[col].value(self._rows[row])

    def rowCount(self, parent: QModelIndex | QPersistentModelIndex = QModelIndex()) -> int:
        return 0 if parent.isValid() else len(self._rows)

    def columnCount(self, parent: QModelIndex | QPersistentModelIndex = QModelIndex()) -> int:
        return 0 if parent.isValid() else len(self._columns)

    def data(self, index, role=_DISPLAY):
        if role not in _RECORD_ROLES or not index.isValid():
            return None
        row, col = index.row(), index.column()
        column = self._columns[col]
        if role == _ALIGNMENT:
            return _LEFT if column.style == "text" else _RIGHT
        if role == _DISPLAY:
            shown = self._shown.get((row, col))
            if shown is None:
                value = column.value(self._rows[row])
                shown = str(value) if column.style in ("text", "figure") else fmt(value, column.style)
                self._shown[(row, col)] = shown
            return shown
        value = column.value(self._rows[row])
        if column.style in ("text", "figure"):
            return str(value)
        return None if value is None or not math.isfinite(float(value)) else float(value)

    def headerData(self, section, orientation, role=Qt.ItemDataRole.DisplayRole):
        if orientation != Qt.Orientation.Horizontal:
            return None
        column = self._columns[section]
        if role == Qt.ItemDataRole.DisplayRole:
            return column.header
        if role == Qt.ItemDataRole.ToolTipRole and column.tip:
            return column.tip
        return None


class MatrixModel(QAbstractTableModel):
    """A states x states matrix of engine numbers, cells tinted by sign and size."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self._matrix = np.zeros((0, 0))
        self._labels: tuple[str, ...] = ()

    def set_matrix(self, matrix: np.ndarray | None, labels: Sequence[str]) -> None:
        self.beginResetModel()
        self._matrix = np.zeros((0, 0)) if matrix is None else np.asarray(matrix, dtype=float)
        self._labels = tuple(labels) if matrix is not None else ()
        self.endResetModel()

    def value(self, row: int, col: int) -> float:
        return float(self._matrix[row, col])

    def rowCount(self, parent: QModelIndex | QPersistentModelIndex = QModelIndex()) -> int:
        return 0 if parent.isValid() else self._matrix.shape[0]

    def columnCount(self, parent: QModelIndex | QPersistentModelIndex = QModelIndex()) -> int:
        return 0 if parent.isValid() else self._matrix.shape[1]

    def data(self, index, role=Qt.ItemDataRole.DisplayRole):
        if not index.isValid():
            return None
        value = self.value(index.row(), index.column())
        if role == Qt.ItemDataRole.DisplayRole:
            return fmt(value)
        if role == Qt.ItemDataRole.TextAlignmentRole:
            return int(Qt.AlignmentFlag.AlignCenter)
        if role == Qt.ItemDataRole.BackgroundRole:
            if index.row() == index.column() or not math.isfinite(value):
                return QBrush(QColor("#f1f1f1"))
            return QBrush(tint(value))
        return None

    def headerData(self, section, orientation, role=Qt.ItemDataRole.DisplayRole):
        if role == Qt.ItemDataRole.DisplayRole and section < len(self._labels):
            return self._labels[section]
        return None


# ----- the tables of a FitResult ------------------------------------------------------
def _ci(p: Parameter, end: int) -> float | None:
    interval = p.ci
    return None if interval is None else interval[end]


@dataclass(frozen=True)
class LoadingRow:
    """A loading with the R-squared of its item."""

    parameter: Parameter
    r_squared: float
    marker: bool


def loading_rows(result: FitResult) -> list[LoadingRow]:
    """One row per (state, item) loading, in the spec's order."""
    rows = []
    items = result.items
    for state in result.spec.states:
        for item in state.items:
            p = result.get("loading", state.name, item)
            marker = result.spec.identification == "marker" and item == state.marker_item
            rows.append(LoadingRow(p, float(result.r_squared[items.index(item)]), marker))
    return rows


def _loading_note(row: LoadingRow) -> str:
    if row.parameter.free:
        return ""
    return "marker item, fixed" if row.marker else "fixed"


LOADING_COLUMNS = (
    Column("State", lambda r: r.parameter.from_, "text"),
    Column("Item", lambda r: r.parameter.to, "text"),
    Column("Estimate", lambda r: r.parameter.estimate),
    Column("Standardized", lambda r: r.parameter.standardized),
    Column("SE", lambda r: r.parameter.se, tip="Standard error (approximate)"),
    Column("95% low", lambda r: _ci(r.parameter, 0), tip="Lower end of the 95% interval"),
    Column("95% high", lambda r: _ci(r.parameter, 1), tip="Upper end of the 95% interval"),
    Column("R²", lambda r: r.r_squared, tip="Share of the item's variance explained by its state(s)"),
    Column("Note", _loading_note, "text"),
)


def loadings_model(parent=None) -> RecordsModel:
    return RecordsModel(LOADING_COLUMNS, parent=parent)


def _lag_text(p: Parameter) -> str:
    return f"t-{p.lag}" if p.lag else ""


PATH_COLUMNS = (
    Column("From", lambda p: p.from_, "text"),
    Column("To", lambda p: p.to, "text"),
    Column("Lag", _lag_text, "text"),
    Column("Kind", lambda p: Kind(p.kind).label, "text"),
    Column("Estimate", lambda p: p.estimate),
    Column("Standardized", lambda p: p.standardized),
    Column("SE", lambda p: p.se),
    Column("95% low", lambda p: _ci(p, 0)),
    Column("95% high", lambda p: _ci(p, 1)),
    Column("p", lambda p: p.p, "p"),
)


def paths_model(parent=None) -> RecordsModel:
    return RecordsModel(PATH_COLUMNS, parent=parent)


def lagged_parameters(result: FitResult, lag: int) -> list[Parameter]:
    """Free lagged paths at `lag`: inertias first, then cross-lagged effects, in state order."""
    kinds = ("inertia", "cross_lagged") if lag == 1 else ("lag2",)
    chosen = [p for p in result.parameters if p.kind in kinds and p.free and (p.lag or 1) == lag]
    order = {s: i for i, s in enumerate(result.states)}
    return sorted(chosen, key=lambda p: (p.from_ != p.to, order.get(p.to, 0), order.get(p.from_, 0)))


def parameter_tooltip(heading: str, p: Parameter) -> str:
    """Hover text of one parameter: estimate, standardized, SE, 95% interval, p."""
    lines = [heading, f"Estimate: {fmt(p.estimate)}", f"Standardized: {fmt(p.standardized)}",
             f"SE: {fmt(p.se)}"]
    if p.ci is not None:
        lines.append(f"95% interval: {fmt(p.ci[0])} to {fmt(p.ci[1])}")
        lines.append(f"p: {fmt(p.p, 'p')}")
    return "\n".join(lines)
