"""Parameters tab: every parameter of the fit, grouped by what it means (CSV export).

Groups: how items measure states (loadings), carry-over and cross-lagged effects (lagged
paths), what is new at each prompt (innovations), item intercepts and unique parts, and for
the first-copy-free estimator the oldest window copies. Each group starts with a header row.
Columns: Value (a fixed value says so: "1.000 (fixed)"), ± SE, 95% range, p, In SD units, and
the bootstrap interval when there is one. The CSV holds the table as shown.
"""

from __future__ import annotations

from dataclasses import dataclass

from PySide6.QtCore import QRegularExpression, QSortFilterProxyModel, Qt
from PySide6.QtGui import QFont
from PySide6.QtWidgets import QComboBox, QLabel, QLineEdit

from lagwise.desktop.results.stability_view import BootstrapIntervals, ParametersWithBootstrap
from lagwise.desktop.results.tables import Column
from lagwise.desktop.results.widgets import ResultsPanel, note_label, table_view
from lagwise.desktop.style import plain
from lagwise.models.kinds import Kind, parameter_words
from lagwise.models.numbers import MISSING, fmt
from lagwise.models.results import FitResult, Parameter

GROUPS = (
    ("How items measure states", (Kind.LOADING,)),
    ("Carry-over and cross-lagged effects", (Kind.INERTIA, Kind.CROSS_LAGGED, Kind.LAG2)),
    ("What is new at each prompt", (Kind.INNOVATION, Kind.PARTIAL_CORRELATION)),
    ("Item intercepts and unique parts", (Kind.INTERCEPT, Kind.UNIQUE,
                                          Kind.UNIQUE_AUTOCORRELATION)),
    ("Oldest window copies (first copy free)", (Kind.FIRST_COPY, Kind.LATENT_INTERCEPT)),
)
SD_UNITS = "In SD units"
SD_UNITS_TIP = ("The value in standard-deviation units of the states and items (the "
                "standardized solution). For two states' innovations this is their covariance "
                "divided by the SDs of the STATES, not the correlation of the innovations that "
                "the Innovations tab shows (which divides by the innovations' own SDs).")


@dataclass(frozen=True)
class Group:
    """A header row of the table."""

    title: str


def parameter_name(p: Parameter) -> str:
    """The row's name in words (models.kinds.parameter_words)."""
    return parameter_words(p.kind, p.from_, p.to, p.lag)


def grouped_rows(parameters) -> list[Group | Parameter]:
    """The parameters under their group headers, in the engine's order within a group."""
    rows: list[Group | Parameter] = []
    for title, kinds in GROUPS:
        members = [p for p in parameters if p.kind in kinds]
        if members:
            rows += [Group(title), *members]
    return rows


def _value(p: Parameter) -> str:
    return fmt(p.estimate) + ("" if p.free else " (fixed)")


def _range(p: Parameter) -> str:
    return MISSING if p.ci is None else f"[{fmt(p.ci[0])}, {fmt(p.ci[1])}]"


COLUMNS = (
    Column("Parameter", parameter_name, "text"),
    Column("Value", _value, "text", tip="The estimate; a fixed value is set by the model"),
    Column("± SE", lambda p: p.se, tip="Standard error (see the note below the table)"),
    Column("95% range", _range, "text", tip="Value ± 1.96 SE"),
    Column("p", lambda p: p.p, "p", tip="Two-sided p-value of value / SE (is it 0?)"),
    Column(SD_UNITS, lambda p: p.standardized, tip=SD_UNITS_TIP),
)


class GroupedParameters(ParametersWithBootstrap):
    """The parameter rows with bold group headers (blank cells besides the title)."""

    def __init__(self, intervals: BootstrapIntervals, parent=None):
        super().__init__(COLUMNS, intervals, parent=parent)
        self._result: FitResult | None = None

    def set_result(self, result: FitResult) -> None:
        self._result = result
        self.set_rows(grouped_rows(result.parameters))

    def data(self, index, role=Qt.ItemDataRole.DisplayRole):
        if not index.isValid():
            return None
        record = self.row_record(index.row())
        if isinstance(record, Group):
            if role == Qt.ItemDataRole.DisplayRole:
                return record.title if index.column() == 0 else ""
            if role == Qt.ItemDataRole.FontRole:
                font = QFont()
                font.setBold(True)
                return font
            return None
        if role == Qt.ItemDataRole.ToolTipRole:
            return self._tip(record, self.column(index.column()).header)
        if role == Qt.ItemDataRole.TextAlignmentRole and index.column() in (1, 3):
            return int(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
        return super().data(index, role)

    def _tip(self, p: Parameter, header: str) -> str | None:
        if header == "± SE" and p.free:
            return f"Standard error {fmt(p.se)}; model-based (inverse information) {fmt(p.se_model)}"
        if header != SD_UNITS or self._result is None:
            return None
        if p.kind == Kind.INNOVATION and p.from_ != p.to:
            states = self._result.states
            i, j = states.index(p.from_), states.index(p.to)
            correlation = self._result.innovation_correlation()[i, j]
            return plain(f"In SD units of the states: {fmt(p.standardized)} (the covariance "
                         f"divided by the SDs of {p.from_} and {p.to}). The correlation of the "
                         f"innovations is {fmt(correlation)} (Innovations tab): it divides by "
                         "the innovations' own SDs, which are smaller than the states' SDs.")
        return SD_UNITS_TIP


class ParameterFilter(QSortFilterProxyModel):
    """Keeps rows of one kind (or all) whose state or item names match a text, with the
    header of every group that keeps a row."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setFilterCaseSensitivity(Qt.CaseSensitivity.CaseInsensitive)
        self._kind = ""

    def set_kind(self, kind: str) -> None:
        if hasattr(self, "beginFilterChange"):  # Qt 6.9 and later
            self.beginFilterChange()
            self._kind = kind
            self.endFilterChange()
        else:
            self._kind = kind
            self.invalidateFilter()

    def _keeps(self, p: Parameter) -> bool:
        if self._kind and p.kind != self._kind:
            return False
        pattern = self.filterRegularExpression()
        if not pattern.pattern():
            return True
        return bool(pattern.match(p.from_).hasMatch() or pattern.match(p.to).hasMatch())

    def filterAcceptsRow(self, row: int, parent) -> bool:
        source = self.sourceModel()
        record = source.row_record(row)
        if not isinstance(record, Group):
            return self._keeps(record)
        for below in range(row + 1, source.rowCount()):
            member = source.row_record(below)
            if isinstance(member, Group):
                return False
            if self._keeps(member):
                return True
        return False


class ParametersPanel(ResultsPanel):
    name = "parameters"

    def __init__(self, parent=None):
        super().__init__("All parameters", parent)
        self.kind_box = QComboBox()
        self.kind_box.setToolTip("Show one kind of parameter")
        self.kind_box.currentIndexChanged.connect(lambda _: self.proxy.set_kind(self.kind_box.currentData() or ""))
        self.search = QLineEdit()
        self.search.setPlaceholderText("Filter by name")
        self.search.setClearButtonEnabled(True)
        self.search.setFixedWidth(200)
        self.search.textChanged.connect(self._set_text)
        index = self.head.indexOf(self.export_button)
        for offset, widget in enumerate((QLabel("Show"), self.kind_box, self.search)):
            self.head.insertWidget(index + offset, widget)
        self.head.insertSpacing(index + 3, 12)

        self.bootstrap = BootstrapIntervals()   # filled by show_bootstrap
        self.model = GroupedParameters(self.bootstrap, parent=self)
        self.proxy = ParameterFilter(self)
        self.proxy.setSourceModel(self.model)
        self.table = table_view(self.proxy)
        self.body.addWidget(self.table, 1)
        self.bootstrap_note = note_label()
        self.body.addWidget(self.bootstrap_note)
        self.show_bootstrap(None)
        self.note = note_label("")
        self.body.addWidget(self.note)

    def _set_text(self, text: str) -> None:
        self.proxy.setFilterRegularExpression(
            QRegularExpression(QRegularExpression.escape(text),
                               QRegularExpression.PatternOption.CaseInsensitiveOption))

    def show_result(self, result: FitResult) -> None:
        self.model.set_result(result)
        self.note.setText(
            "± SE: the standard error (hover for the model-based one). 95% range: value ± 1.96 SE. p: how surprising the value would be if it "
            "were 0. In SD units: the standardized value (for innovation covariances not the "
            "same as the Innovations tab's correlation of the innovations; hover for both). "
            "A value marked (fixed) is set by the model, not estimated. " + result.cautions[-1])
        present = [k for k in Kind if any(p.kind == k for p in result.parameters)]
        current = self.kind_box.currentData()
        self.kind_box.blockSignals(True)
        self.kind_box.clear()
        self.kind_box.addItem("All kinds", "")
        for kind in present:
            self.kind_box.addItem(kind.label, str(kind))
        self.kind_box.setCurrentIndex(max(0, self.kind_box.findData(current)) if current in present else 0)
        self.kind_box.blockSignals(False)
        self.proxy.set_kind(self.kind_box.currentData() or "")

    def show_bootstrap(self, boot) -> None:
        """Bootstrap intervals beside the model's (models.bootstrap.Bootstrap), or none: the
        column is hidden while there is no bootstrap of the shown estimate."""
        self.bootstrap.set(boot)
        self.bootstrap_note.setVisible(boot is not None)
        if boot is not None:
            self.bootstrap_note.setText(
                f"Bootstrap 95%: the interval holding the middle 95% of the estimates from "
                f"{fmt(boot.used, 'int')} replicates of this diary (percentile interval); the "
                "Stability tab says how they were drawn.")
        column = self.model.bootstrap_column
        if self.model.rowCount():
            self.model.dataChanged.emit(self.model.index(0, column),
                                        self.model.index(self.model.rowCount() - 1, column))
        if self.table.isColumnHidden(column) != (boot is None):
            self.table.setColumnHidden(column, boot is None)

    def tables(self) -> dict:
        return {"parameters as shown": self.proxy}
