"""Lag-2 check tab: "Is lag 1 enough?" in plain words, the likelihood-ratio test, and one
score test per fixed lag-2 path and unique autocorrelation, with a button that adopts an
indicated path into the model.

Every number is taken from models.lag2check.Lag2Check and shown through the results
number format (tables.fmt); nothing is computed here. Adopting only emits
`adopt_requested(kind, from_, to)`: the window owner turns it into an undoable edit of the
specification.
"""

from __future__ import annotations

import html

from PySide6.QtCore import QSortFilterProxyModel, Qt, Signal
from PySide6.QtGui import QBrush, QColor, QFont
from PySide6.QtWidgets import QHBoxLayout, QLabel, QPushButton, QSizePolicy

from lagwise.desktop.results.palette import NEGATIVE, POSITIVE
from lagwise.desktop.results.tables import SORT_ROLE, Column, RecordsModel
from lagwise.desktop.results.widgets import ResultsPanel, note_label, section_label, table_view
from lagwise.desktop.style import WARNING
from lagwise.models.lag2check import Lag2Check, PathTest, in_model, lag1_version
from lagwise.models.numbers import fmt
from lagwise.models.results import FitResult
from lagwise.models.spec import ModelSpec

TEST_NAMES = {"lag2": "Lag-2 path", "unique_autocorrelation": "Unique autocorrelation"}

EMPTY_TEXT = ("No lag-2 check yet. The check fits the current lag-1 model and the same model "
              "with every lag-2 path free on the same windows of 3 prompts, then tests "
              "each path that the lag-1 model leaves out. Press “Run lag-2 check”.")

READING_GUIDE = (
    "Score: how much the fit would improve if this one path were added (a chi-square on 1 df, "
    "also called a modification index). Expected change: the value the path would probably take "
    "if it were added; standardized, on the scale of the states' standard deviations. A lag-2 "
    "path runs from a state two prompts back to a state now; a unique autocorrelation lets the "
    "part of an item that its state does not explain carry over to the next prompt. Adopt a "
    "path only when it also makes sense for this person.")

MULTIPLICITY_NOTE = ("{n} paths are tested at once. A path counts as indicated when its Holm "
                     "p-value (Holm 1979) is below .05; indicated paths are shown in bold and "
                     "only they can be adopted.")

RUN_TIP = ("Fit the lag-1 and the lag-2 model on the same lag windows and test every lag-2 "
           "path (runs in the background)")

_STALE = ("The model has changed since the last lag-2 check. Press “Run lag-2 check” to test "
          "the current model.")


def _where(t: PathTest) -> tuple[str, str]:
    """From and To in plain words: a state two prompts back, or an item at the previous prompt."""
    if t.kind == "lag2":
        return f"{t.from_} (t-2)", f"{t.to} (t)"
    return f"{t.from_} (t-1)", f"{t.to} (t)"


PATH_TEST_COLUMNS = (
    Column("Test", lambda t: TEST_NAMES.get(t.kind, t.kind), "text"),
    Column("From", lambda t: _where(t)[0], "text", tip="State two prompts back, or an item's unique part one prompt back"),
    Column("To", lambda t: _where(t)[1], "text", tip="State or item at the current prompt"),
    Column("Score", lambda t: t.score, tip="Score statistic (modification index), chi-square on 1 df"),
    Column("p", lambda t: t.p, "p", tip="p-value of this path alone"),
    Column("Holm p", lambda t: t.p_holm, "p", tip="p-value adjusted for testing every path (Holm 1979)"),
    Column("Expected change", lambda t: t.epc, tip="Expected value of the path if it were added (EPC)"),
    Column("Std. expected change", lambda t: t.std_epc,
           tip="Expected change in standardized units (state standard deviations)"),
)


class PathTestsModel(RecordsModel):
    """The score tests, one per row; indicated paths in bold on a light tint."""

    def __init__(self, parent=None):
        super().__init__(PATH_TEST_COLUMNS, parent=parent)
        self._indicated: frozenset[tuple[str, str, str]] = frozenset()

    def set_check(self, check: Lag2Check | None) -> None:
        self._indicated = frozenset() if check is None else frozenset(
            (t.kind, t.from_, t.to) for t in check.indicated)
        self.set_rows(() if check is None else check.paths)

    def is_indicated(self, row: int) -> bool:
        t = self.row_record(row)
        return (t.kind, t.from_, t.to) in self._indicated

    def data(self, index, role=Qt.ItemDataRole.DisplayRole):
        if index.isValid() and self.is_indicated(index.row()):
            if role == Qt.ItemDataRole.FontRole:
                font = QFont()
                font.setBold(True)
                return font
            if role == Qt.ItemDataRole.BackgroundRole:
                tint = QColor(NEGATIVE)
                tint.setAlphaF(0.14)
                return QBrush(tint)
            if role == Qt.ItemDataRole.ToolTipRole:
                return "Indicated: Holm p below .05. Select it and press “Adopt path” to add it to the model."
        return super().data(index, role)


class Lag2View(ResultsPanel):
    """The lag-2 check of the current model (see module docstring).

    Feed it `set_spec(spec)` whenever the model changes (or `show_result(result)`) and
    `show_check(check)` when a check finishes. Signals: `adopt_requested(kind, from_, to)`
    for the selected indicated path (kind "lag2": state `from_` at t-2 -> state `to` at t;
    kind "unique_autocorrelation": item `to`; `lagwise.models.lag2check.adopt` builds the new specification),
    and `run_requested()` from the "Run lag-2 check" button.
    """

    name = "lag-2 check"
    adopt_requested = Signal(str, str, str)
    run_requested = Signal()
    check_changed = Signal()   # a check was shown or cleared

    def __init__(self, parent=None):
        super().__init__("Is lag 1 enough? The lag-2 check", parent)
        self._check: Lag2Check | None = None
        self._spec: ModelSpec | None = None
        self.run_button = QPushButton("Run lag-2 check")
        self.run_button.setToolTip(RUN_TIP)
        self.run_button.clicked.connect(self.run_requested)
        self.head.insertWidget(self.head.indexOf(self.export_button), self.run_button)

        self.verdict = QLabel()
        self.verdict.setObjectName("lag2Verdict")
        self.verdict.setWordWrap(True)
        self.verdict.setTextFormat(Qt.TextFormat.RichText)
        self.verdict.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.body.addWidget(self.verdict)
        self.lr_line = QLabel()
        self.lr_line.setObjectName("lag2LikelihoodRatio")
        self.lr_line.setWordWrap(True)
        self.lr_line.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.body.addWidget(self.lr_line)
        self.problems = note_label()
        self.problems.setStyleSheet(f"color: {WARNING};")
        self.body.addWidget(self.problems)

        self.body.addSpacing(4)
        self.body.addWidget(section_label("Each path on its own (score tests at the lag-1 estimates)"))
        self.model = PathTestsModel(self)
        self.proxy = QSortFilterProxyModel(self)
        self.proxy.setSortRole(SORT_ROLE)
        self.proxy.setSourceModel(self.model)
        self.table = table_view(self.proxy, stretch_last=False)
        self.table.setSortingEnabled(True)
        self.table.setSelectionMode(self.table.SelectionMode.SingleSelection)
        self.table.selectionModel().selectionChanged.connect(lambda *_: self._update_adopt())
        self.body.addWidget(self.table, 1)

        row = QHBoxLayout()
        self.adopt_button = QPushButton("Adopt path")
        self.adopt_button.setEnabled(False)
        self.adopt_button.clicked.connect(self._adopt)
        self.adopt_hint = note_label()
        row.addWidget(self.adopt_button)
        row.addWidget(self.adopt_hint, 1)
        self.body.addLayout(row)

        self.multiplicity = note_label()
        self.cautions = note_label()
        self.guide = note_label(READING_GUIDE)
        for label in (self.multiplicity, self.cautions, self.guide):
            self.body.addWidget(label)
        for label in (self.problems, self.adopt_hint, self.multiplicity, self.cautions, self.guide):
            # Wrapped text takes its height for the width it gets (the layout asks it); a fixed
            # minimum from its narrow preferred shape would make every results tab taller.
            policy = label.sizePolicy()
            policy.setVerticalPolicy(QSizePolicy.Policy.Preferred)
            label.setSizePolicy(policy)
        self.show_check(None)

    # ----- showing a check --------------------------------------------------------------
    @property
    def check(self) -> Lag2Check | None:
        return self._check

    def show_result(self, result: FitResult) -> None:
        """A new estimate: keep the check only when it tests the same lag-1 model."""
        self.set_spec(result.spec)

    def set_spec(self, spec: ModelSpec) -> None:
        """The model being edited: a check of another lag-1 model is cleared as out of date,
        and paths already in `spec` are no longer offered for adoption."""
        self._spec = spec
        can_run = bool(spec.states) and spec.lags >= 1
        self.run_button.setEnabled(can_run)
        self.run_button.setToolTip(RUN_TIP if can_run else "The lag-2 check needs a model with lagged "
                                   "paths: choose lag order 1 on the Dynamics page first.")
        if self._check is not None and self._check.restricted.spec != lag1_version(spec):
            self.show_check(None, _STALE)
        self._update_adopt()

    def show_check(self, check: Lag2Check | None, message: str = "") -> None:
        """Show a finished check, or (None) the empty state with an optional message."""
        self._check = check
        self.model.set_check(check)
        self.check_changed.emit()
        if check is None:
            self._banner(html.escape(message or EMPTY_TEXT), "quiet")
            for label in (self.lr_line, self.problems, self.multiplicity, self.cautions):
                label.clear()
            self.lr_line.hide()
            self.problems.hide()
            self._update_adopt()
            return
        self._banner(html.escape(check.verdict), "indicated" if check.indicated or check.lr_p < 0.05 else "quiet")
        self.lr_line.setText(
            f"Likelihood-ratio test, lag-1 model against the model with all {check.lr_df} lag-2 paths "
            f"free ({fmt(check.restricted.n_windows, 'int')} lag windows of "
            f"{fmt(check.restricted.depth + 1, 'int')} prompts): "
            f"chi-square {fmt(check.lr_chi2)} on {check.lr_df} df, p {fmt(check.lr_p, 'p')}.")
        self.lr_line.show()
        problems = []
        for name, fitted in (("lag-1 model", check.restricted), ("model with lag-2 paths", check.extended)):
            if not fitted.converged:
                problems.append(f"The {name} did not converge. {fitted.message} Treat the tests as "
                                "provisional.")
            problems += [f"The {name}: {flag}" for flag in fitted.flags]
        self.problems.setText(" ".join(problems))
        self.problems.setVisible(bool(problems))
        self.multiplicity.setText(MULTIPLICITY_NOTE.format(n=len(check.paths)))
        self.cautions.setText(" ".join(check.cautions))
        self.table.sortByColumn(self.model.column_of("Score"), Qt.SortOrder.DescendingOrder)
        self.table.resizeColumnsToContents()
        first = self.proxy.index(0, 0)
        if check.indicated and first.isValid() and self.model.is_indicated(self.proxy.mapToSource(first).row()):
            self.table.selectRow(0)
        self._update_adopt()

    def _banner(self, text: str, tone: str) -> None:
        colour, fill, ink = ((NEGATIVE, "#fbeee9", "#3a1d16") if tone == "indicated"
                             else (POSITIVE, "#e8f3f2", "#12403d"))
        self.verdict.setText(text)
        self.verdict.setStyleSheet(f"background:{fill}; border-left:5px solid {colour}; "
                                   f"padding:8px 10px; color:{ink}; font-size:11pt;")

    # ----- adopting a path --------------------------------------------------------------
    def selected_test(self) -> PathTest | None:
        rows = self.table.selectionModel().selectedRows()
        if not rows:
            return None
        return self.model.row_record(self.proxy.mapToSource(rows[0]).row())

    def _selected_is_indicated(self) -> bool:
        rows = self.table.selectionModel().selectedRows()
        return bool(rows) and self.model.is_indicated(self.proxy.mapToSource(rows[0]).row())

    def _update_adopt(self) -> None:
        t = self.selected_test()
        present = t is not None and self._spec is not None and in_model(self._spec, t)
        ok = t is not None and self._selected_is_indicated() and not present
        self.adopt_button.setEnabled(ok)
        if self._check is None:
            self.adopt_hint.setText("")
        elif not self._check.indicated:
            self.adopt_hint.setText("No path is indicated, so there is nothing to adopt.")
        elif t is None:
            self.adopt_hint.setText("Select an indicated (bold) path to adopt it.")
        elif present:
            self.adopt_hint.setText("This path is already in the model.")
        elif not ok:
            self.adopt_hint.setText("This path is not indicated (Holm p of .05 or more): it is not offered for adoption.")
        elif t.kind == "lag2":
            self.adopt_hint.setText(f"Adopting makes the model lag 2 and frees the path from {t.from_} "
                                    f"two prompts back to {t.to}. Undo with Edit ▸ Undo.")
        else:
            self.adopt_hint.setText(f"Adopting lets the unique part of '{t.to}' carry over from one "
                                    "prompt to the next. Undo with Edit ▸ Undo.")

    def _adopt(self) -> None:
        if self.adopt_button.isEnabled():
            t = self.selected_test()
            self.adopt_requested.emit(t.kind, t.from_, t.to)

    # ----- export -----------------------------------------------------------------------
    def pictures(self) -> dict:
        return {"lag-2 check": self}

    def tables(self) -> dict:
        return {"lag-2 tests as shown": self.proxy}
