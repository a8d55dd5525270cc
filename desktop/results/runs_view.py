"""The Runs tab: every estimate of the project (models.runs), which one is current, and the
buttons that rename, annotate, delete, reopen and compare them.

Every edit goes through the session's undo stack (Session.rename_run, annotate_run,
delete_run, reopen_run), so Edit > Undo brings a deleted run back. "Reopen" makes the run
current and its model and settings the model being edited; "Compare" asks for the selected
runs side by side (`compare_requested`, wired to the Compare tab by the ResultsView).
"""

from __future__ import annotations

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (QAbstractItemView, QHBoxLayout, QInputDialog, QLabel,
                               QMessageBox, QPushButton)

from lagwise.desktop.results.tables import Column, RecordsModel
from lagwise.desktop.results.widgets import ResultsPanel, note_label, table_view
from lagwise.desktop.style import plain
from lagwise.models.errors import LagwiseError
from lagwise.models.runs import Run

COLUMNS = (
    Column("Run", lambda r: r.name, "text", "The run's name (unique in the project)"),
    Column("Made (UTC)", lambda r: r.time.replace("T", " ").removesuffix("Z"), "text"),
    Column("Estimator", lambda r: r.options.method.short, "text"),
    Column("States", lambda r: ", ".join(r.spec.state_names), "text"),
    Column("Lag order", lambda r: r.spec.lags, "int"),
    Column("Free parameters", lambda r: r.result.fit.n_free, "int"),
    Column("Log-likelihood", lambda r: r.result.fit.loglik),
    Column("AIC", lambda r: r.result.fit.aic),
    Column("BIC", lambda r: r.result.fit.bic),
    Column("Converged", lambda r: "yes" if r.result.converged else "NO", "text"),
    Column("Data", lambda r: r.fingerprint[:8], "text",
           "The start of the data fingerprint: runs with different ones used other data or "
           "other preparation steps"),
    Column("Note", lambda r: r.note.splitlines()[0] if r.note.strip() else "", "text"),
)
HINT = ("Every estimate is kept as a run. Select one to rename, annotate, delete or reopen it "
        "(its model and settings become the model); select two or more to compare them.")


class RunsPanel(ResultsPanel):
    """The project's runs as a table (see the module docstring)."""

    name = "runs"
    compare_requested = Signal(tuple)   # the selected runs, in the table's order

    def __init__(self, parent=None) -> None:
        super().__init__("Runs", parent)
        self._session = None
        self.current_label = QLabel()
        self.current_label.setObjectName("currentRun")
        self.current_label.setTextFormat(Qt.TextFormat.PlainText)
        self.body.addWidget(self.current_label)
        self.body.addWidget(note_label(HINT))
        self.model = RecordsModel(COLUMNS)
        self.table = table_view(self.model, stretch_last=True)
        self.table.setObjectName("runsTable")
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.ExtendedSelection)
        self.body.addWidget(self.table, 1)
        buttons = QHBoxLayout()
        self.rename_button = QPushButton("Rename…")
        self.note_button = QPushButton("Note…")
        self.delete_button = QPushButton("Delete")
        self.reopen_button = QPushButton("Reopen as the model")
        self.compare_button = QPushButton("Compare")
        for button, slot in ((self.rename_button, self.rename_selected),
                             (self.note_button, self.annotate_selected),
                             (self.delete_button, self.delete_selected),
                             (self.reopen_button, self.reopen_selected),
                             (self.compare_button, self.compare_selected)):
            button.clicked.connect(lambda _=False, s=slot: s())
            buttons.addWidget(button)
        buttons.addStretch(1)
        self.body.addLayout(buttons)
        self.table.selectionModel().selectionChanged.connect(self._update_buttons)
        self._update_buttons()

    def set_session(self, session) -> None:
        """Follow `session`'s runs (desktop.session.Session) and edit them through it."""
        self._session = session
        session.runsChanged.connect(self.refresh)
        session.resultChanged.connect(self.refresh)
        self.refresh()

    def refresh(self) -> None:
        """Show the session's runs, keeping the selection by name."""
        chosen = self.selected_names()
        runs = self._session.runs
        self.model.set_rows(runs)
        current = self._session.current_run
        self.current_label.setText("Current run: none" if current is None else
                                   f"Current run: {current.name}")
        self.select(*[name for name in chosen if name in {r.name for r in runs}])

    def tables(self) -> dict:
        return {"runs": self.model}

    # ----- selection -------------------------------------------------------------------
    def selected_runs(self) -> list[Run]:
        rows = sorted(index.row() for index in self.table.selectionModel().selectedRows())
        return [self.model.row_record(row) for row in rows]

    def selected_names(self) -> list[str]:
        return [run.name for run in self.selected_runs()]

    def select(self, *names: str) -> None:
        """Select the runs with these names (and no others)."""
        self.table.clearSelection()
        mode = self.table.selectionMode()
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.MultiSelection)
        for row in range(self.model.rowCount()):
            if self.model.row_record(row).name in names:
                self.table.selectRow(row)
        self.table.setSelectionMode(mode)

    def _update_buttons(self) -> None:
        count = len(self.table.selectionModel().selectedRows())
        for button in (self.rename_button, self.note_button, self.delete_button,
                       self.reopen_button):
            button.setEnabled(count == 1)
        self.compare_button.setEnabled(count >= 2)

    def _single(self) -> Run | None:
        """The selected run when exactly one is selected."""
        runs = self.selected_runs()
        return runs[0] if len(runs) == 1 else None

    # ----- edits -----------------------------------------------------------------------
    def rename_selected(self, new_name: str | None = None) -> None:
        """Rename the selected run (asks for the name unless given)."""
        run = self._single()
        if run is None:
            return
        if new_name is None:
            new_name, ok = QInputDialog.getText(self, "Rename run", "New name:", text=run.name)
            if not ok:
                return
        self._edit(lambda: self._session.rename_run(run.name, new_name), "rename the run")
        self.select(new_name.strip())

    def annotate_selected(self, note: str | None = None) -> None:
        """Replace the selected run's note (asks for it unless given)."""
        run = self._single()
        if run is None:
            return
        if note is None:
            note, ok = QInputDialog.getMultiLineText(self, "Note on the run", run.name, run.note)
            if not ok:
                return
        self._edit(lambda: self._session.annotate_run(run.name, note), "keep the note")

    def delete_selected(self) -> None:
        """Delete the selected run (Edit > Undo brings it back)."""
        run = self._single()
        if run is not None:
            self._edit(lambda: self._session.delete_run(run.name), "delete the run")

    def reopen_selected(self) -> None:
        """Make the selected run current and its model and settings the model."""
        run = self._single()
        if run is not None:
            self._edit(lambda: self._session.reopen_run(run.name), "reopen the run")

    def compare_selected(self) -> None:
        runs = self.selected_runs()
        if len(runs) >= 2:
            self.compare_requested.emit(tuple(runs))

    def _edit(self, edit, what: str) -> None:
        try:
            edit()
        except LagwiseError as error:
            QMessageBox.warning(self, f"Could not {what}", plain(str(error)))
