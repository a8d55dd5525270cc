"""Parameters tab: every parameter of the fit in one sortable, filterable table (CSV export).

Sorting uses the raw engine numbers (tables.SORT_ROLE), so 10 sorts after 9; the CSV holds
the table as shown.
"""

from __future__ import annotations

from PySide6.QtCore import QRegularExpression, QSortFilterProxyModel, Qt
from PySide6.QtWidgets import QComboBox, QLabel, QLineEdit

from lagwise.desktop.results.stability_view import BootstrapIntervals, ParametersWithBootstrap
from lagwise.desktop.results.tables import PARAMETER_COLUMNS, SORT_ROLE
from lagwise.models.kinds import Kind
from lagwise.models.numbers import fmt
from lagwise.desktop.results.widgets import ResultsPanel, note_label, table_view
from lagwise.models.estimators import ERRORS
from lagwise.models.results import FitResult


class ParameterFilter(QSortFilterProxyModel):
    """Numeric sort; keeps rows of one kind (or all) whose state or item names match a text."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setSortRole(SORT_ROLE)
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

    def filterAcceptsRow(self, row: int, parent) -> bool:
        source = self.sourceModel()
        p = source.row_record(row)
        if self._kind and p.kind != self._kind:
            return False
        pattern = self.filterRegularExpression()
        if not pattern.pattern():
            return True
        return bool(pattern.match(p.from_).hasMatch() or pattern.match(p.to).hasMatch())


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
        self.model = ParametersWithBootstrap(PARAMETER_COLUMNS, self.bootstrap, parent=self)
        self.proxy = ParameterFilter(self)
        self.proxy.setSourceModel(self.model)
        self.table = table_view(self.proxy, stretch_last=True)
        self.table.setSortingEnabled(True)
        self.table.sortByColumn(-1, Qt.SortOrder.AscendingOrder)
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
        self.model.set_rows(result.parameters)
        self.note.setText(
            f"Click a column title to sort. Standard errors (SE): {ERRORS[result.se_method]}; "
            "SE (model) beside them for comparison. The 95% interval is estimate ± 1.96 SE; "
            "z = estimate / SE. Fixed parameters are set by the model, not estimated. "
            + result.cautions[-1])
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
        columns are hidden while there is no bootstrap of the shown estimate."""
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
