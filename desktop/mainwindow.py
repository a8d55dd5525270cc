"""The main window: pages Data, States, Dynamics, Results; menus; estimation in a worker.

The window owns one Session (the document) and one Worker. Estimate sends a frozen
snapshot of the diary, model and settings to `models.estimate.fit` off the UI thread;
progress shows in the status bar with a Cancel button; a LagwiseError becomes a dialog;
a cancelled run leaves the shown results as they were. Window size, position and the
splitter layout are remembered between runs (QSettings).
"""

from __future__ import annotations

from pathlib import Path

import shiboken6
from PySide6.QtCore import QByteArray, QObject, QSettings, QSize, Qt, Slot
from PySide6.QtGui import QAction, QCloseEvent, QKeySequence
from PySide6.QtWidgets import (
    QApplication, QFileDialog, QHBoxLayout, QLabel, QListWidget, QListWidgetItem, QMainWindow,
    QMessageBox, QProgressBar, QPushButton, QScrollArea, QSplitter, QStackedWidget, QToolBar,
    QVBoxLayout, QWidget,
)

from desktop import style
from desktop.import_dialog import FILE_FILTER, ImportDialog
from desktop.pages.data_page import DataPage
from desktop.pages.dynamics_page import DynamicsPage
from desktop.pages.states_page import StatesPage
from desktop.results import ResultsView
from desktop.session import Session, Snapshot
from desktop.worker import Worker
from models.errors import LagwiseError
from models.estimate import fit
from models.results import FitResult

PAGES = ("Data", "States", "Dynamics", "Results")
SETTINGS_GEOMETRY = "window/geometry"
SETTINGS_STATE = "window/state"
SETTINGS_PAGE = "window/page"
SETTINGS_FOLDER = "import/folder"
SETTINGS_SPLITTERS = "splitters/"


class _TwinAction(QAction):
    """Triggers `original` and follows its enabled state; its tooltip is the original's text."""

    def __init__(self, original: QAction, text: str, parent: QObject) -> None:
        super().__init__(text, parent)
        self._original = original
        self.triggered.connect(original.trigger)
        original.changed.connect(self.follow)  # a QObject slot: disconnected when either dies
        self.follow()

    @Slot()
    def follow(self) -> None:
        if not shiboken6.isValid(self._original):  # the original is being destroyed
            return
        self.setEnabled(self._original.isEnabled())
        self.setToolTip(self._original.text().replace("&", ""))


class MainWindow(QMainWindow):
    """The Lagwise window (see the module docstring)."""

    def __init__(self, session: Session | None = None, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("lagwiseMainWindow")
        self.setWindowTitle("Lagwise")
        self.session = session if session is not None else Session(self)
        self.worker = Worker(self)
        self._running: Snapshot | None = None
        self._build_pages()
        self._build_actions()
        self._build_menus()
        self._build_status()
        self._connect()
        self._restore_layout()
        self._update_title()
        self._update_actions()

    # ----- building ------------------------------------------------------------------
    def _build_pages(self) -> None:
        central = QWidget()
        layout = QHBoxLayout(central)
        layout.setContentsMargins(0, 0, 0, 0)
        layout.setSpacing(0)
        self.nav = QListWidget()
        self.nav.setObjectName("pageNavigation")
        self.nav.setAccessibleName("Pages")
        self.nav.setFixedWidth(150)
        self.nav.setStyleSheet(
            f"QListWidget {{ background: #e6ecec; border: none; padding-top: 8px; outline: 0; }}"
            f"QListWidget::item {{ padding: 10px 14px; color: {style.INK}; }}"
            f"QListWidget::item:selected {{ background: {style.PAPER}; color: {style.INK};"
            f" border-left: 4px solid {style.POSITIVE}; font-weight: bold; }}")
        self.stack = QStackedWidget()
        self.data_page = DataPage(self.session)
        self.states_page = StatesPage(self.session)
        self.dynamics_page = DynamicsPage(self.session)
        self.results_page = self._results_page()
        for name, page in zip(PAGES, self.pages()):
            self.nav.addItem(QListWidgetItem(name))
            self.stack.addWidget(page)
        self.nav.currentRowChanged.connect(self.stack.setCurrentIndex)
        self.nav.setCurrentRow(0)
        layout.addWidget(self.nav)
        layout.addWidget(self.stack, 1)
        self.setCentralWidget(central)

    def _results_page(self) -> QWidget:
        page = QWidget()
        page.setObjectName("resultsPage")
        layout = QVBoxLayout(page)
        title = QLabel("Results")
        title.setFont(style.heading_font(self.font()))
        layout.addWidget(title)
        self.result_note = QLabel()
        self.result_note.setObjectName("resultNote")
        self.result_note.setWordWrap(True)
        layout.addWidget(self.result_note)
        self.results = ResultsView()
        scroll = QScrollArea()  # lets the window shrink below the results' natural size
        scroll.setWidgetResizable(True)
        scroll.setFrameShape(QScrollArea.Shape.NoFrame)
        scroll.setWidget(self.results)
        layout.addWidget(scroll, 1)
        return page

    def pages(self) -> tuple[QWidget, ...]:
        return (self.data_page, self.states_page, self.dynamics_page, self.results_page)

    def _action(self, text: str, shortcut=None, slot=None, tip: str = "") -> QAction:
        action = QAction(text, self)
        if shortcut is not None:
            if isinstance(shortcut, (list, tuple)):
                action.setShortcuts([QKeySequence(s) for s in shortcut])
            else:
                action.setShortcut(QKeySequence(shortcut))
        if slot is not None:
            action.triggered.connect(slot)
        if tip:
            action.setStatusTip(tip)
            action.setToolTip(tip)
        return action

    def _build_actions(self) -> None:
        K = QKeySequence.StandardKey
        self.import_action = self._action("&Import data…", K.Open, self.import_data,
                                          "Read a diary from a CSV, TSV, Excel, SPSS or Stata file")
        self.demo_action = self._action("Open &demo", None, self.open_demo,
                                        "Open the invented demo diary with its model")
        self.quit_action = self._action("&Quit", K.Quit, self.close)
        self.undo_action = self.session.undo_stack.createUndoAction(self, "&Undo")
        self.undo_action.setShortcuts(QKeySequence.keyBindings(K.Undo))
        self.redo_action = self.session.undo_stack.createRedoAction(self, "&Redo")
        self.redo_action.setShortcuts([QKeySequence("Ctrl+Shift+Z"), QKeySequence("Ctrl+Y")])
        self.estimate_action = self._action("&Estimate", ["Ctrl+E", "F5"], self.estimate,
                                            "Estimate the model (Ctrl+E)")
        self.cancel_action = self._action("&Cancel estimation", "Ctrl+.", self.cancel_estimate,
                                          "Stop the running estimation")
        self.page_actions = []
        for i, name in enumerate(PAGES):
            action = self._action(f"&{i + 1} {name}", f"Ctrl+{i + 1}",
                                  lambda _=False, i=i: self.show_page(i), f"Show the {name} page")
            self.page_actions.append(action)
        self.about_action = self._action("&About Lagwise", None, self.about)

    def _build_menus(self) -> None:
        bar = self.menuBar()
        file_menu = bar.addMenu("&File")
        file_menu.addAction(self.import_action)
        file_menu.addAction(self.demo_action)
        file_menu.addSeparator()
        file_menu.addAction(self.quit_action)
        edit_menu = bar.addMenu("&Edit")
        edit_menu.addAction(self.undo_action)
        edit_menu.addAction(self.redo_action)
        model_menu = bar.addMenu("&Model")
        model_menu.addAction(self.estimate_action)
        model_menu.addAction(self.cancel_action)
        view_menu = bar.addMenu("&View")
        for action in self.page_actions:
            view_menu.addAction(action)
        help_menu = bar.addMenu("&Help")
        help_menu.addAction(self.about_action)

        tools = QToolBar("Main tools")
        tools.setObjectName("mainTools")
        tools.setMovable(False)
        tools.setToolButtonStyle(Qt.ToolButtonStyle.ToolButtonTextOnly)
        tools.addAction(self.import_action)
        tools.addSeparator()
        tools.addAction(self._short_twin(self.undo_action, "Undo"))
        tools.addAction(self._short_twin(self.redo_action, "Redo"))
        tools.addSeparator()
        tools.addAction(self.estimate_action)
        self.addToolBar(tools)

    def _short_twin(self, action: QAction, text: str) -> QAction:
        """A toolbar copy of `action` with a short, fixed label (the menu keeps the long one)."""
        return _TwinAction(action, text, self)

    def _build_status(self) -> None:
        status = self.statusBar()
        self.progress = QProgressBar()
        self.progress.setRange(0, 1000)
        self.progress.setFixedWidth(220)
        self.progress.setTextVisible(False)
        self.progress_label = QLabel()
        self.cancel_button = QPushButton("Cancel")
        self.cancel_button.setToolTip("Stop the running estimation (Ctrl+.)")
        self.cancel_button.clicked.connect(self.cancel_estimate)
        for widget in (self.progress_label, self.progress, self.cancel_button):
            status.addPermanentWidget(widget)
            widget.hide()
        status.showMessage("Ready.")

    def _connect(self) -> None:
        s = self.session
        s.dataChanged.connect(self._update_title)
        for signal in (s.dataChanged, s.specChanged, s.optionsChanged, s.resultChanged):
            signal.connect(self._update_actions)
        s.resultChanged.connect(self._show_result)
        s.specChanged.connect(self._show_result_note)
        s.optionsChanged.connect(self._show_result_note)
        s.dataChanged.connect(self._show_result_note)
        self.worker.started.connect(self._run_started)
        self.worker.progress.connect(self._run_progress)
        self.worker.done.connect(self._run_done)
        self.worker.error.connect(self._run_error)
        self.worker.cancelled.connect(self._run_cancelled)
        self.worker.idle.connect(self._run_idle)

    # ----- pages ---------------------------------------------------------------------
    def show_page(self, index: int) -> None:
        self.nav.setCurrentRow(index)

    def current_page(self) -> int:
        return self.stack.currentIndex()

    # ----- data ----------------------------------------------------------------------
    def import_data(self, path: str | Path | None = None) -> ImportDialog | None:
        """Choose a file (unless `path` is given) and open the import dialog for it."""
        if path is None:
            folder = str(QSettings().value(SETTINGS_FOLDER, "") or "")
            path, _ = QFileDialog.getOpenFileName(self, "Import a diary", folder, FILE_FILTER)
            if not path:
                return None
        dialog = self.import_dialog(path)
        dialog.open()
        return dialog

    def import_dialog(self, path: str | Path | None = None) -> ImportDialog:
        """A new import dialog whose acceptance loads the diary into the session."""
        dialog = ImportDialog(self, path)
        dialog.start_folder = str(QSettings().value(SETTINGS_FOLDER, "") or "")
        dialog.accepted.connect(lambda: self._import_accepted(dialog))
        return dialog

    def _import_accepted(self, dialog: ImportDialog) -> None:
        diary, settings = dialog.diary(), dialog.settings()
        if diary is None or settings is None:
            return
        QSettings().setValue(SETTINGS_FOLDER, str(Path(settings.path).parent))
        self.worker.cancel()
        self.session.load_data(dialog.frame(), diary, settings)
        self.statusBar().showMessage(
            f"Imported {Path(settings.path).name}: {diary.n_items} items, "
            f"{diary.n_occasions} prompts. Next: give the items states.", 8000)
        self.show_page(0)

    def open_demo(self) -> None:
        from desktop.app import load_demo

        try:
            load_demo(self.session)
        except LagwiseError as exc:
            QMessageBox.warning(self, "Could not open the demo", str(exc))
            return
        self.statusBar().showMessage("Opened the demo diary (an invented person).", 8000)

    # ----- estimation ----------------------------------------------------------------
    def estimate(self) -> bool:
        """Start estimating the current model; False (with a message) when it cannot start."""
        snapshot = self.session.snapshot()
        if snapshot is None:
            QMessageBox.information(self, "Nothing to estimate",
                                    "Import a diary first (File ▸ Import data…).")
            return False
        _, problem = self.session.validation()
        if problem:
            QMessageBox.warning(self, "The model cannot be estimated yet", problem)
            return False
        self._running = snapshot
        self.worker.start(fit, snapshot.diary, snapshot.spec, snapshot.options)
        return True

    def cancel_estimate(self) -> None:
        if self.worker.busy:
            self.worker.cancel()
            self.progress_label.setText("Stopping…")

    @Slot()
    def _run_started(self) -> None:
        self.progress.setValue(0)
        self.progress_label.setText("Estimating…")
        for widget in (self.progress_label, self.progress, self.cancel_button):
            widget.show()
        self.statusBar().clearMessage()
        self._update_actions()

    @Slot(float, str)
    def _run_progress(self, fraction: float, message: str) -> None:
        self.progress.setValue(round(1000 * fraction))
        self.progress_label.setText(message)

    @Slot(object)
    def _run_done(self, result: FitResult) -> None:
        self.session.set_result(result, self._running)
        verdict = "converged" if result.converged else "did NOT converge"
        self.statusBar().showMessage(
            f"Estimated in {result.seconds:.2f} s from {result.n_windows} lag windows; "
            f"the estimation {verdict}.", 15000)
        self.show_page(PAGES.index("Results"))

    @Slot(str, str)
    def _run_error(self, message: str, details: str) -> None:
        self.statusBar().showMessage("Estimation failed; the previous results are kept.", 15000)
        box = QMessageBox(QMessageBox.Icon.Warning, "Estimation failed", message,
                          QMessageBox.StandardButton.Ok, self)
        if details:
            box.setDetailedText(details)
        box.setObjectName("estimationErrorBox")
        box.open()

    @Slot(str)
    def _run_cancelled(self, message: str) -> None:
        self.statusBar().showMessage("Estimation stopped; the previous results are kept.", 15000)

    @Slot()
    def _run_idle(self) -> None:
        for widget in (self.progress_label, self.progress, self.cancel_button):
            widget.hide()
        self._running = None if not self.worker.busy else self._running
        self._update_actions()

    # ----- showing -------------------------------------------------------------------
    def _show_result(self) -> None:
        self.results.show_result(self.session.result)
        self._show_result_note()

    def _show_result_note(self) -> None:
        result = self.session.result
        if result is None:
            self.result_note.setText("")
            self.result_note.hide()
            return
        self.result_note.show()
        parts = []
        if not self.session.result_is_current():
            parts.append(f"<span style='color:{style.WARNING}'><b>The model or data changed "
                         f"since this estimate.</b> Press Estimate (Ctrl+E) to update.</span>")
        verdict = ("the estimation converged" if result.converged else
                   f"<b>the estimation did not converge</b> ({result.message})")
        parts.append(f"Estimator: {result.estimator}; {result.n_windows} lag windows from "
                     f"{result.n_occasions} prompts; {verdict}.")
        self.result_note.setText(" ".join(parts))

    def _update_title(self) -> None:
        settings = self.session.import_settings
        name = Path(settings.path).name if settings is not None else ""
        self.setWindowTitle(f"{name} — Lagwise" if name else "Lagwise")

    def _update_actions(self) -> None:
        has_data = self.session.diary is not None
        self.estimate_action.setEnabled(has_data and self.session.spec.k > 0)
        self.cancel_action.setEnabled(self.worker.busy)

    def about(self) -> None:
        QMessageBox.about(
            self, "About Lagwise",
            "<b>Lagwise</b><br>A workbench for one person's dynamic factor model: from an "
            "experience-sampling diary to latent states and how they carry over from prompt "
            "to prompt.<br><br>The estimates describe one person's diary; they are uncertain "
            "and are no diagnosis.")

    # ----- layout memory and closing -------------------------------------------------
    def _restore_layout(self) -> None:
        settings = QSettings()
        geometry = settings.value(SETTINGS_GEOMETRY)
        if isinstance(geometry, QByteArray) and not geometry.isEmpty():
            self.restoreGeometry(geometry)
        else:
            self.resize(QSize(1280, 840))
        state = settings.value(SETTINGS_STATE)
        if isinstance(state, QByteArray) and not state.isEmpty():
            self.restoreState(state)
        for splitter in self._named_splitters():
            saved = settings.value(SETTINGS_SPLITTERS + splitter.objectName())
            if isinstance(saved, QByteArray) and not saved.isEmpty():
                splitter.restoreState(saved)
        page = settings.value(SETTINGS_PAGE, 0)
        try:
            self.show_page(min(max(int(page), 0), len(PAGES) - 1))
        except (TypeError, ValueError):
            self.show_page(0)

    def save_layout(self) -> None:
        settings = QSettings()
        settings.setValue(SETTINGS_GEOMETRY, self.saveGeometry())
        settings.setValue(SETTINGS_STATE, self.saveState())
        settings.setValue(SETTINGS_PAGE, self.current_page())
        for splitter in self._named_splitters():
            settings.setValue(SETTINGS_SPLITTERS + splitter.objectName(), splitter.saveState())
        settings.sync()

    def _named_splitters(self) -> list[QSplitter]:
        return [s for s in self.findChildren(QSplitter) if s.objectName()]

    def closeEvent(self, event: QCloseEvent) -> None:
        """Stop a running estimate and wait for it, then remember the layout."""
        if self.worker.busy:
            self.statusBar().showMessage("Stopping the estimation…")
            QApplication.setOverrideCursor(Qt.CursorShape.WaitCursor)
            try:
                self.worker.wait()
            finally:
                QApplication.restoreOverrideCursor()
        self.save_layout()
        event.accept()
