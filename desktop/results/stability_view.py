"""Stability tab: how stable each lagged path is if the diary had been a little different
(models.bootstrap), and the bootstrap intervals the Parameters tab shows beside the model's.

Every number is taken from a models.bootstrap.Bootstrap and shown through the results number
format (models.numbers.fmt); nothing is computed here. The "Check stability (bootstrap)"
button only emits `run_requested(replicates)`: the window runs the bootstrap in its worker and
hands the finished one back with `show_bootstrap`.
"""

from __future__ import annotations

import html

from PySide6.QtCore import QSortFilterProxyModel, Qt, Signal
from PySide6.QtGui import QBrush, QColor
from PySide6.QtWidgets import QLabel, QPushButton, QSpinBox

from lagwise.desktop.results.palette import NEGATIVE, POSITIVE
from lagwise.desktop.results.tables import SORT_ROLE, Column, RecordsModel
from lagwise.desktop.results.widgets import ResultsPanel, fit_height, note_label, table_view
from lagwise.desktop.style import WARNING
from lagwise.models.bootstrap import Bootstrap, Interval, PathStability
from lagwise.models.kinds import Kind
from lagwise.models.numbers import MISSING, fmt
from lagwise.models.results import FitResult, Parameter

DEFAULT_REPLICATES = 500
RUN_TEXT = "Check stability (bootstrap)"
RUN_TIP = ("Redraw the diary many times (whole days, or blocks of prompts when the days are "
           "joined), refit the model to each and see how much every estimate moves "
           "(runs in the background, on every core)")
EMPTY_TEXT = ("No bootstrap yet. How stable is each lagged path if the diary had been a little "
              "different? Choose the number of replicates and press “Check stability (bootstrap)”.")
STALE_TEXT = ("The estimate has changed since the last bootstrap. Press “Check stability "
              "(bootstrap)” to check the present estimate.")
READING_GUIDE = (
    "Each replicate is a diary drawn from this one: whole days drawn with replacement (or, when "
    "the days are joined, blocks of prompts: the stationary bootstrap), refitted with the same "
    "model. Same sign: the share of replicates whose estimate has the sign of this diary's "
    "estimate. The 95% interval holds the middle 95% of the replicates' estimates (percentile "
    "interval). A path whose sign is the same in nearly every replicate and whose interval "
    "excludes 0 does not hang on a few days; a path that changes sign often may. The "
    "Parameters tab shows this interval for every parameter beside the model's own.")


def _lag_text(s: PathStability) -> str:
    return f"t-{s.lag}" if s.lag else ""


STABILITY_COLUMNS = (
    Column("From", lambda s: s.from_, "text", tip="State at the earlier prompt"),
    Column("To", lambda s: s.to, "text", tip="State at the later prompt"),
    Column("Lag", _lag_text, "text"),
    Column("Kind", lambda s: Kind(s.kind).label, "text"),
    Column("Estimate", lambda s: s.estimate, tip="This diary's estimate"),
    Column("Same sign", lambda s: s.same_sign,
           tip="Share of bootstrap replicates whose estimate has the sign of this diary's"),
    Column("95% low", lambda s: s.lower, tip="Lower end of the bootstrap percentile interval"),
    Column("95% high", lambda s: s.upper, tip="Upper end of the bootstrap percentile interval"),
    Column("Excludes 0", lambda s: "yes" if s.excludes_zero else "no", "text",
           tip="Whether the bootstrap interval leaves out 0"),
)


class StabilityModel(RecordsModel):
    """The lagged paths' stability; a path whose interval excludes 0 is tinted by its sign."""

    def __init__(self, parent=None):
        super().__init__(STABILITY_COLUMNS, parent=parent)

    def data(self, index, role=Qt.ItemDataRole.DisplayRole):
        if index.isValid() and role == Qt.ItemDataRole.BackgroundRole:
            s: PathStability = self.row_record(index.row())
            if s.excludes_zero:
                tint = QColor(POSITIVE if s.estimate >= 0 else NEGATIVE)
                tint.setAlphaF(0.13)
                return QBrush(tint)
        return super().data(index, role)


class BootstrapIntervals:
    """The bootstrap percentile interval of each free parameter, looked up by (kind, from,
    to), for the column the Parameters tab adds beside the model interval ("[low, high]",
    sorted by its low end)."""

    HEADER = "Bootstrap 95%"
    TIP = ("Bootstrap 95% interval (percentile) of each free parameter: the middle 95% of the "
           "replicates' estimates (see the Stability tab)")

    def __init__(self) -> None:
        self._by_key: dict[tuple[str, str, str], Interval] = {}
        self.bootstrap: Bootstrap | None = None

    def set(self, boot: Bootstrap | None) -> None:
        self.bootstrap = boot
        self._by_key = {} if boot is None else {
            (str(i.kind), i.from_, i.to): i for i in boot.percentile()}

    def interval(self, p: Parameter) -> Interval | None:
        return self._by_key.get((str(p.kind), p.from_, p.to))

    def text(self, p: Parameter) -> str:
        found = self.interval(p)
        return MISSING if found is None else f"[{fmt(found.lower)}, {fmt(found.upper)}]"

    def column(self) -> Column:
        return Column(self.HEADER, self.text, "text", tip=self.TIP)


class ParametersWithBootstrap(RecordsModel):
    """The parameter table with the bootstrap column after the model's "95% range" (sorted
    numerically by the interval's low end)."""

    def __init__(self, columns: tuple[Column, ...], intervals: BootstrapIntervals, parent=None):
        headers = [c.header for c in columns]
        at = headers.index("95% range") + 1 if "95% range" in headers else len(columns)
        super().__init__((*columns[:at], intervals.column(), *columns[at:]), parent=parent)
        self.intervals = intervals
        self.bootstrap_column = at

    def data(self, index, role=Qt.ItemDataRole.DisplayRole):
        if index.isValid() and index.column() == self.bootstrap_column:
            if role == SORT_ROLE:
                found = self.intervals.interval(self.row_record(index.row()))
                return None if found is None or found.lower is None else float(found.lower)
            if role == Qt.ItemDataRole.TextAlignmentRole:
                return int(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
        return super().data(index, role)


class StabilityPanel(ResultsPanel):
    """The bootstrap of the present estimate (see the module docstring). Signals:
    `run_requested(replicates)` from the button."""

    name = "stability"
    run_requested = Signal(int)

    def __init__(self, parent=None):
        super().__init__("How stable are the lagged paths? (bootstrap)", parent)
        self._bootstrap: Bootstrap | None = None
        self._result: FitResult | None = None
        self.replicates = QSpinBox()
        self.replicates.setRange(20, 10_000)
        self.replicates.setSingleStep(100)
        self.replicates.setValue(DEFAULT_REPLICATES)
        self.replicates.setSuffix(" replicates")
        self.replicates.setToolTip("How many resampled diaries to refit (500 is a good default)")
        self.run_button = QPushButton(RUN_TEXT)
        self.run_button.setObjectName("bootstrapRun")
        self.run_button.setToolTip(RUN_TIP)
        self.run_button.clicked.connect(lambda: self.run_requested.emit(self.replicates.value()))
        at = self.head.indexOf(self.export_button)
        self.head.insertWidget(at, self.replicates)
        self.head.insertWidget(at + 1, self.run_button)

        self.summary = QLabel()
        self.summary.setObjectName("bootstrapSummary")
        self.summary.setWordWrap(True)
        self.summary.setTextFormat(Qt.TextFormat.RichText)
        self.summary.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.body.addWidget(self.summary)
        self.problems = note_label()
        self.problems.setStyleSheet(f"color: {WARNING};")
        self.body.addWidget(self.problems)
        self.model = StabilityModel(self)
        self.proxy = QSortFilterProxyModel(self)
        self.proxy.setSortRole(SORT_ROLE)
        self.proxy.setSourceModel(self.model)
        self.table = table_view(self.proxy, stretch_last=False)
        self.table.setSortingEnabled(True)
        self.table.sortByColumn(-1, Qt.SortOrder.AscendingOrder)
        self.body.addWidget(self.table)
        self.guide = note_label(READING_GUIDE)
        self.body.addWidget(self.guide)
        self.body.addStretch(1)
        self.show_bootstrap(None)

    @property
    def bootstrap(self) -> Bootstrap | None:
        return self._bootstrap

    def show_result(self, result: FitResult) -> None:
        """A new estimate: a bootstrap of another estimate is cleared as out of date."""
        if self._bootstrap is not None and result is not self._result:
            self.show_bootstrap(None, STALE_TEXT)
        self._result = result
        self.run_button.setEnabled(bool(result.spec.lags))

    def show_bootstrap(self, boot: Bootstrap | None, message: str = "",
                       result: FitResult | None = None) -> None:
        """Show a finished bootstrap of `result` (default: the shown one), or (None) the
        empty state with an optional message."""
        self._bootstrap = boot
        if result is not None:
            self._result = result
        self.model.set_rows(() if boot is None else boot.stability())
        fit_height(self.table)
        if boot is None:
            self.summary.setText(html.escape(message or EMPTY_TEXT))
            self.problems.clear()
            self.problems.hide()
            return
        how = ("whole days drawn with replacement" if boot.block_length is None else
               f"stationary blocks of {fmt(boot.block_length, digits=1)} prompts on average "
               "(the days are joined)")
        self.summary.setText(
            f"<b>{fmt(boot.used, 'int')} of {fmt(boot.replicates, 'int')} replicates</b> "
            f"refitted; resampling {html.escape(how)}; seed {boot.seed}.")
        self.problems.setText(boot.warning or "")
        self.problems.setVisible(bool(boot.warning))
        self.table.resizeColumnsToContents()
        fit_height(self.table)

    def pictures(self) -> dict:
        return {"stability": self}

    def tables(self) -> dict:
        return {"stability as shown": self.proxy}
