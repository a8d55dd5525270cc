"""The main window: pages Data, States, Dynamics, Results; menus; long work in a worker.

The window owns one Session (the document, also the project file's content), one Worker
and the project-file commands (desktop.project_files: New, Open, Save, Save As, Open
Recent, autosave and recovery). Estimate sends a frozen snapshot of the prepared diary,
model and settings to `models.estimate.fit` off the UI thread; the lag-2 check tab's
"Run" sends one to `models.lag2check.lag2_check` through the same worker, and the Stability
tab's "Check stability (bootstrap)" one to `models.bootstrap.bootstrap`. Progress shows
in the status bar with a Cancel button; a LagwiseError becomes a dialog; a cancelled run
leaves the shown results as they were. File ▸ Export report… writes the shown estimate
as HTML or PDF (desktop.report_output). The title shows the project's name and a mark for
unsaved changes; closing with unsaved changes asks first. Window size, position and the
splitter layout are remembered between runs (QSettings).
"""

from __future__ import annotations

from html import escape
from pathlib import Path

import shiboken6
from PySide6.QtCore import QByteArray, QObject, QSettings, QSize, Qt, Slot
from PySide6.QtGui import QAction, QCloseEvent, QKeySequence
from PySide6.QtWidgets import (
    QApplication, QFileDialog, QHBoxLayout, QLabel, QListWidget, QListWidgetItem, QMainWindow,
    QMenu, QMessageBox, QProgressBar, QPushButton, QScrollArea, QSplitter, QStackedWidget,
    QToolBar, QVBoxLayout, QWidget,
)

from lagwise.desktop import style
from lagwise.desktop.compute_settings import ComputeDialog, load_compute
from lagwise.desktop.guide import RESULTS_SECTIONS, GuideWindow, add_guide_button
from lagwise.desktop.import_dialog import FILE_FILTER, ImportDialog
from lagwise.desktop.notes_dialog import NotesDialog
from lagwise.desktop.pages.data_page import DataPage
from lagwise.desktop.pages.dynamics_page import DynamicsPage
from lagwise.desktop.pages.plan_page import PlanPage
from lagwise.desktop.pages.states_page import StatesPage
from lagwise.desktop.project_files import ProjectFiles
from lagwise.desktop.report_output import ReportExport
from lagwise.desktop.results import ResultsView
from lagwise.desktop.session import Session, Snapshot
from lagwise.desktop.study_bar import StudyBar
from lagwise.desktop.worker import Worker
from lagwise.models.bootstrap import bootstrap
from lagwise.models.errors import LagwiseError
from lagwise.models.estimate import fit
from lagwise.models.lag2check import adopt, lag2_check
from lagwise.models.numbers import fmt
from lagwise.models.project import embed_table
from lagwise.models.plan import run_plan

PAGES = ("Data", "States", "Dynamics", "Results", "Plan")
PAGE_SECTIONS = ("data", "states", "dynamics", "results", "plan")   # their sections in the guide
SETTINGS_GEOMETRY = "window/geometry"
SETTINGS_STATE = "window/state"
SETTINGS_PAGE = "window/page"
SETTINGS_FOLDER = "import/folder"
SETTINGS_SPLITTERS = "splitters/"
JOB_ESTIMATE = "estimate"
JOB_LAG2 = "lag-2 check"
JOB_BOOTSTRAP = "bootstrap"
JOB_PLAN = "plan"
_JOB_WORDS = {JOB_ESTIMATE: ("Estimating…", "Estimation"),
              JOB_LAG2: ("Running the lag-2 check…", "The lag-2 check"),
              JOB_BOOTSTRAP: ("Checking stability (bootstrap)…", "The bootstrap"),
              JOB_PLAN: ("Planning: simulating diaries…", "The plan")}
_LAG2_DATA_CHANGED = ("The data or their preparation changed since the last lag-2 check. Press "
                      "“Run lag-2 check” to test the model on the present data.")


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
        self.files = ProjectFiles(self, self.session)
        self.report_export = ReportExport(self, self.session, lambda: self.results.lag2.check)
        self._running: Snapshot | None = None
        self._running_document = -1
        self._bootstrapped = None   # the estimate the running bootstrap checks
        self._close_confirmed = False
        self.guide: GuideWindow | None = None   # made when first opened
        self._build_pages()
        self._build_actions()
        self._build_menus()
        self._build_status()
        self._connect()
        self._restore_layout()
        self.study_bar.refresh()   # shown for a study only, whatever the saved layout says
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
        self.plan_page = PlanPage(self.session)
        for name, page in zip(PAGES, self.pages()):
            self.nav.addItem(QListWidgetItem(name))
            self.stack.addWidget(page)
        self.nav.currentRowChanged.connect(self.stack.setCurrentIndex)
        self.nav.setCurrentRow(0)
        layout.addWidget(self.nav)
        layout.addWidget(self.stack, 1)
        self.setCentralWidget(central)
        self._add_guide_buttons()

    def _add_guide_buttons(self) -> None:
        """A "?" beside the title of every page and every results tab."""
        for name, section, page in zip(PAGES, PAGE_SECTIONS, self.pages()):
            title = next(t for t in page.findChildren(QLabel) if t.text() == name)
            add_guide_button(title, lambda s=section: self.open_guide(s), f"the {name} page")
        for panel in self.results.tab_panels():
            section = RESULTS_SECTIONS[panel.name]
            add_guide_button(panel.title, lambda s=section: self.open_guide(s),
                             f"the {panel.name} tab")

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
        return (self.data_page, self.states_page, self.dynamics_page, self.results_page,
                self.plan_page)

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
        files = self.files
        self.new_action = self._action("&New project", K.New, files.new,
                                       "Start an empty, untitled project")
        self.open_action = self._action("&Open project…", K.Open,
                                        lambda: files.open(),
                                        "Open a Lagwise project (.lagwise)")
        self.save_action = self._action("&Save project", K.Save, files.save,
                                        "Save the project (data, model, results and notes)")
        self.save_as_action = self._action("Save project &as…", "Ctrl+Shift+S", files.save_as,
                                           "Save the project under a new name")
        self.recent_menu = QMenu("Open &recent", self)
        self.recent_menu.setObjectName("recentMenu")
        self.recent_menu.aboutToShow.connect(self._prune_recent)
        self.notes_action = self._action("Project &notes…", None, self.edit_notes,
                                         "Notes kept in the project file")
        self.import_action = self._action("&Import data…", "Ctrl+I", self.import_data,
                                          "Read a diary from a CSV, TSV, Excel, SPSS or Stata file")
        self.demo_action = self._action("Open &demo", None, self.open_demo,
                                        "Open the invented demo diary with its model")
        self.report_action = self._action("Export &report…", None, self.report_export.ask,
                                          "Write the report of the results as HTML or PDF")
        self.batch_action = self._action("Open &batch results…", None, self.open_batch,
                                         "Show the results of 'lagwise batch' across people")
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
        self.guide_action = self._action("Lagwise &guide", "F1", lambda: self.open_guide(),
                                         "Open the guide at the page in view (F1)")
        self.about_action = self._action("&About Lagwise", None, self.about)

    def _build_menus(self) -> None:
        bar = self.menuBar()
        self.file_menu = file_menu = bar.addMenu("&File")
        file_menu.addAction(self.new_action)
        file_menu.addAction(self.open_action)
        file_menu.addMenu(self.recent_menu)
        file_menu.addSeparator()
        file_menu.addAction(self.save_action)
        file_menu.addAction(self.save_as_action)
        file_menu.addAction(self.report_action)
        file_menu.addSeparator()
        file_menu.addAction(self.import_action)
        file_menu.addAction(self.demo_action)
        file_menu.addAction(self.batch_action)
        file_menu.addSeparator()
        file_menu.addAction(self.quit_action)
        edit_menu = bar.addMenu("&Edit")
        edit_menu.addAction(self.undo_action)
        edit_menu.addAction(self.redo_action)
        edit_menu.addSeparator()
        edit_menu.addAction(self.notes_action)
        model_menu = bar.addMenu("&Model")
        model_menu.addAction(self.estimate_action)
        model_menu.addAction(self.cancel_action)
        model_menu.addSeparator()
        self.compute_action = model_menu.addAction("C&omputing…")
        self.compute_action.setStatusTip("Run many fits (every person, a plan) on this "
                                         "computer's cores or on a Dask cluster")
        self.compute_action.triggered.connect(lambda: ComputeDialog(self).open())
        view_menu = bar.addMenu("&View")
        for action in self.page_actions:
            view_menu.addAction(action)
        help_menu = bar.addMenu("&Help")
        help_menu.addAction(self.guide_action)
        help_menu.addSeparator()
        help_menu.addAction(self.about_action)

        tools = QToolBar("Main tools")
        tools.setObjectName("mainTools")
        tools.setMovable(False)
        tools.setToolButtonStyle(Qt.ToolButtonStyle.ToolButtonTextOnly)
        tools.addAction(self.import_action)
        tools.addAction(self._short_twin(self.save_action, "Save"))
        tools.addSeparator()
        tools.addAction(self._short_twin(self.undo_action, "Undo"))
        tools.addAction(self._short_twin(self.redo_action, "Redo"))
        tools.addSeparator()
        tools.addAction(self.estimate_action)
        self.addToolBar(tools)
        self.study_bar = StudyBar(self.session, lambda: self.show_page(PAGES.index("Results")),
                                  self)
        self.addToolBar(self.study_bar)

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
        s.fileChanged.connect(self._update_title)
        s.modifiedChanged.connect(self._update_title)
        s.dataChanged.connect(self._update_title)
        for signal in (s.dataChanged, s.specChanged, s.optionsChanged, s.resultChanged):
            signal.connect(self._update_actions)
        s.resultChanged.connect(self._show_result)
        for signal in (s.specChanged, s.optionsChanged, s.dataChanged, s.preparationChanged):
            signal.connect(self._show_result_note)
        self.files.recentChanged.connect(self._fill_recent_menu)
        s.documentReplaced.connect(self.worker.cancel)
        self._connect_lag2()
        self.results.set_session(s)
        self.results.stability.run_requested.connect(self.run_bootstrap)
        self.plan_page.runRequested.connect(self.run_plan)
        self.results.responses.choice_changed.connect(
            lambda: s.set_responses(self.results.responses.response_choice()))
        self.dynamics_page.set_estimate_action(self.estimate_action)
        self.results.follow_worker(self.worker, JOB_ESTIMATE)
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
        """A new diary starts a new, untitled project (after the unsaved-changes question)."""
        diary, settings, frame = dialog.diary(), dialog.settings(), dialog.frame()
        if diary is None or settings is None:
            return
        QSettings().setValue(SETTINGS_FOLDER, str(Path(settings.path).parent))

        def load() -> None:
            self.files.discard_recoveries()
            choice = dialog.study_choice()
            self.session.load_data(dialog.diary_rows(), diary, settings,
                                   data=embed_table(frame, settings.path), study=choice)
            who = "" if choice is None else \
                f"{len(dialog.study())} people; {choice.person}'s diary: "
            self.statusBar().showMessage(
                f"Imported {Path(settings.path).name}: {who}{diary.n_items} items, "
                f"{diary.n_occasions} prompts. Next: give the items states.", 8000)
            self.show_page(0)

        self.files.confirm_discard(load, "importing another diary")

    def open_demo(self) -> None:
        """Open the bundled demo (after the unsaved-changes question)."""
        self.files.confirm_discard(self._open_demo_now, "opening the demo")

    def _open_demo_now(self) -> None:
        from lagwise.desktop.app import load_demo

        try:
            load_demo(self.session)
        except LagwiseError as exc:
            QMessageBox.warning(self, "Could not open the demo", style.plain(str(exc)))
            return
        self.files.discard_recoveries()
        self.statusBar().showMessage("Opened the demo diary (an invented person).", 8000)

    def open_batch(self) -> None:
        """Show a `lagwise batch` output folder across people (desktop.across_dialog)."""
        folder = QFileDialog.getExistingDirectory(self, "Open batch results")
        if not folder:
            return
        try:
            self.study_bar.show_across(folder)
        except LagwiseError as exc:
            QMessageBox.warning(self, "Could not open the batch results", style.plain(str(exc)))

    # ----- estimation ----------------------------------------------------------------
    def estimate(self) -> bool:
        """Start estimating the current model; False (with a message) when it cannot start."""
        snapshot = self._ready_snapshot("The model cannot be estimated yet")
        if snapshot is None:
            return False
        self._running, self._running_document = snapshot, self.session.document
        self.worker.start(fit, snapshot.diary, snapshot.spec, snapshot.options, job=JOB_ESTIMATE)
        return True

    def run_lag2_check(self) -> bool:
        """Start the lag-2 check of the current model (models.lag2check.lag2_check) in the
        worker; False (with a message) when it cannot start."""
        snapshot = self._ready_snapshot("The lag-2 check cannot run yet")
        if snapshot is None:
            return False
        self._running, self._running_document = snapshot, self.session.document
        self.worker.start(lag2_check, snapshot.diary, snapshot.spec, snapshot.options,
                          job=JOB_LAG2)
        return True

    def run_bootstrap(self, replicates: int = 500) -> bool:
        """Start the bootstrap of the shown estimate (models.bootstrap.bootstrap, on this
        computer's cores or a cluster: Model ▸ Computing…) in the worker; False (with a
        message) when there is no current estimate."""
        result = self.session.result
        if result is None or not self.session.result_is_current():
            QMessageBox.information(self, "Estimate first", "The bootstrap checks the present "
                                    "estimate: press Estimate (Ctrl+E) first.")
            return False
        snapshot = self._ready_snapshot("The bootstrap cannot run yet")
        if snapshot is None:
            return False
        self._running, self._running_document = snapshot, self.session.document
        self._bootstrapped = result
        compute = load_compute()
        self.worker.start(bootstrap, snapshot.diary, snapshot.spec, snapshot.options, result,
                          replicates=int(replicates), jobs=compute.jobs,
                          scheduler=compute.scheduler, job=JOB_BOOTSTRAP)
        return True

    def run_plan(self, truth, designs, replications: int, seed: int) -> None:
        """Start a study plan (models.plan.run_plan, on every core) in the worker; a stopped
        plan still delivers the diaries finished so far."""
        self._running, self._running_document = None, self.session.document
        compute = load_compute()            # this computer's cores or a cluster (Model menu)
        self.worker.start(run_plan, truth, tuple(designs), replications=replications,
                          seed=seed, jobs=compute.jobs, scheduler=compute.scheduler,
                          job=JOB_PLAN)

    def _ready_snapshot(self, title: str) -> Snapshot | None:
        """The frozen inputs for a run, or None after telling the user what is missing."""
        try:
            snapshot = self.session.snapshot()
        except LagwiseError as exc:  # a preparation step that does not fit the diary
            QMessageBox.warning(self, title, style.plain(str(exc)))
            return None
        if snapshot is None:
            QMessageBox.information(self, "Nothing to estimate",
                                    "Import a diary first (File ▸ Import data…).")
            return None
        _, problem = self.session.validation()
        if problem:
            QMessageBox.warning(self, title, style.plain(problem))
            return None
        return snapshot

    def cancel_estimate(self) -> None:
        if self.worker.busy:
            self.worker.cancel()
            self.progress_label.setText("Stopping…")

    @Slot()
    def _run_started(self) -> None:
        self.progress.setValue(0)
        self.progress_label.setText(_JOB_WORDS.get(self.worker.job, ("Working…", ""))[0])
        for widget in (self.progress_label, self.progress, self.cancel_button):
            widget.show()
        self.statusBar().clearMessage()
        self._update_actions()

    @Slot(float, str)
    def _run_progress(self, fraction: float, message: str) -> None:
        self.progress.setValue(round(1000 * fraction))
        self.progress_label.setText(message)

    @Slot(object)
    def _run_done(self, result) -> None:
        if self._running_document != self.session.document:  # the document was replaced
            return
        if self.worker.job == JOB_BOOTSTRAP:
            self._bootstrap_done(result)
            return
        if self.worker.job == JOB_PLAN:
            self.plan_page.show_plan(result)
            self.statusBar().showMessage("Plan finished." if result.complete else
                                         "Plan stopped: the diaries finished so far are shown.",
                                         15000)
            return
        if self.worker.job == JOB_LAG2:
            self.results.lag2.show_check(result)
            self.results.lag2.set_spec(self.session.spec)  # edited meanwhile: out of date
            self.session.set_lag2(result, self._running)
            self.statusBar().showMessage(f"Lag-2 check finished: {result.verdict}", 15000)
            self.show_page(PAGES.index("Results"))
            self.results.tabs.setCurrentWidget(self.results.lag2)
            return
        self.session.set_result(result, self._running)
        verdict = "converged" if result.converged else "did NOT converge"
        self.statusBar().showMessage(
            f"Estimated in {result.seconds:.2f} s from {result.data_used}; "
            f"the estimation {verdict}.", 15000)
        self.show_page(PAGES.index("Results"))

    def _bootstrap_done(self, boot) -> None:
        if self.session.result is not self._bootstrapped:
            self.statusBar().showMessage("The estimate changed while the bootstrap ran; "
                                         "its results are dropped.", 15000)
            return
        self.session.set_bootstrap(boot)
        self.results.show_bootstrap(boot, self.session.result)
        self.statusBar().showMessage(f"Bootstrap finished: {fmt(boot.used, 'int')} of "
                                     f"{fmt(boot.replicates, 'int')} replicates refitted.", 15000)
        self.show_page(PAGES.index("Results"))
        self.results.tabs.setCurrentWidget(self.results.stability)

    @Slot(str, str)
    def _run_error(self, message: str, details: str) -> None:
        what = _JOB_WORDS.get(self.worker.job, ("", "The run"))[1]
        self.statusBar().showMessage(f"{what} failed; the previous results are kept.", 15000)
        box = QMessageBox(QMessageBox.Icon.Warning, f"{what} failed", message,
                          QMessageBox.StandardButton.Ok, self)
        if details:
            box.setDetailedText(details)
        box.setTextFormat(Qt.TextFormat.PlainText)  # the message may quote the user's names
        box.setObjectName("estimationErrorBox")
        box.open()

    @Slot(str)
    def _run_cancelled(self, message: str) -> None:
        what = _JOB_WORDS.get(self.worker.job, ("", "The run"))[1]
        self.statusBar().showMessage(f"{what} stopped; the previous results are kept.", 15000)

    @Slot()
    def _run_idle(self) -> None:
        for widget in (self.progress_label, self.progress, self.cancel_button):
            widget.hide()
        self._running = None if not self.worker.busy else self._running
        self._update_actions()

    # ----- showing -------------------------------------------------------------------
    def _show_result(self) -> None:
        """A new result in every tab (the lag-2 tab keeps following the model being edited)."""
        self.results.set_diary(self.session.diary)
        self.results.show_result(self.session.result)
        run = self.session.current_run
        if run is not None and run.bootstrap is not None:   # kept with the run
            self.results.show_bootstrap(run.bootstrap, run.result)
        if run is not None and run.lag2 is not None:
            self.results.lag2.show_check(run.lag2)
        if self.session.result is not None and self.session.responses is not None:
            self.results.responses.set_response_choice(self.session.responses)
        self.results.lag2.set_spec(self.session.spec)
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
        verdict = ("the estimation converged." if result.converged else
                   f"<b>the estimation did not converge.</b> {escape(result.message)}")
        parts.append(f"Estimator: {result.options.method.short}; {result.data_used} from "
                     f"{result.n_occasions} prompts; {verdict}")
        self.result_note.setText(" ".join(parts))

    def _update_title(self) -> None:
        """'NAME[*] — Lagwise': the project's name, '*' while there are unsaved changes."""
        self.setWindowTitle(f"{self.session.name}[*] — Lagwise")
        self.setWindowModified(self.session.is_modified())

    def _update_actions(self) -> None:
        has_data = self.session.diary is not None
        self.estimate_action.setEnabled(has_data and self.session.spec.k > 0)
        self.cancel_action.setEnabled(self.worker.busy)
        self.save_action.setEnabled(has_data)
        self.save_as_action.setEnabled(has_data)
        self.report_action.setEnabled(has_data)

    # ----- the lag-2 check -----------------------------------------------------------
    def _connect_lag2(self) -> None:
        lag2 = self.results.lag2
        lag2.run_requested.connect(self.run_lag2_check)
        lag2.adopt_requested.connect(self.adopt_path)
        self.session.specChanged.connect(self._lag2_follow_spec)
        self.session.documentReplaced.connect(self._lag2_clear)
        self.session.dataChanged.connect(self._lag2_data_changed)
        self.session.preparationChanged.connect(self._lag2_data_changed)
        self.session.dataChanged.connect(self._diary_changed)
        lag2.set_spec(self.session.spec)

    def adopt_path(self, kind: str, from_: str, to: str) -> None:
        """Add a path indicated by the lag-2 check to the model (undoable)."""
        if kind == "lag2":
            text = f"Adopt lag-2 path {from_} (t-2) → {to}"
        else:
            text = f"Adopt unique autocorrelation of {to}"
        try:
            spec = adopt(self.session.spec, kind, from_, to)
        except (LagwiseError, ValueError) as exc:
            QMessageBox.warning(self, "The path cannot be adopted", style.plain(str(exc)))
            return
        self.session.edit_spec(spec, text)
        self.statusBar().showMessage(f"{text}. Press Estimate to fit the extended model "
                                     "(Edit ▸ Undo takes it back).", 15000)

    @Slot()
    def _lag2_follow_spec(self) -> None:
        self.results.lag2.set_spec(self.session.spec)

    @Slot()
    def _lag2_clear(self) -> None:
        self.results.lag2.show_check(None)

    @Slot()
    def _diary_changed(self) -> None:
        self.results.set_diary(self.session.diary)

    @Slot()
    def _lag2_data_changed(self) -> None:
        lag2 = self.results.lag2
        if lag2.check is not None:
            lag2.show_check(None, _LAG2_DATA_CHANGED)

    # ----- project notes -------------------------------------------------------------
    def edit_notes(self) -> NotesDialog:
        """Edit > Project notes: accepted notes become an undoable edit of the document."""
        dialog = NotesDialog(self.session.notes, self)
        dialog.accepted.connect(lambda: self.session.set_notes(dialog.text()))
        dialog.finished.connect(dialog.deleteLater)
        dialog.open()
        return dialog

    def _prune_recent(self) -> None:
        """Before Open recent shows: drop projects that no longer exist, and say so."""
        gone = self.files.prune_recent()
        if gone:
            self.statusBar().showMessage(
                "Removed from the recent projects (no longer found): "
                + ", ".join(p.name for p in gone), 10000)
        self._fill_recent_menu()

    def _fill_recent_menu(self) -> None:
        menu = self.recent_menu
        menu.clear()
        paths = self.files.recent()
        for number, path in enumerate(paths, start=1):
            action = menu.addAction(f"&{number} {path.name}")
            action.setStatusTip(str(path))
            action.setData(str(path))
            action.triggered.connect(lambda _=False, p=path: self.files.open_recent(p))
        if not paths:
            menu.addAction("No recent projects").setEnabled(False)

    # ----- the guide -----------------------------------------------------------------
    def guide_section(self) -> str:
        """The guide's section of the page (and results tab) in view."""
        page = self.current_page()
        if self.pages()[page] is self.results_page and self.results.stack.currentWidget() is self.results.tabs:
            return RESULTS_SECTIONS.get(getattr(self.results.tabs.currentWidget(), "name", ""),
                                        "results")
        return PAGE_SECTIONS[page]

    def open_guide(self, section: str | None = None) -> GuideWindow:
        """Open the guide at `section` (default: the page in view)."""
        if self.guide is None:
            self.guide = GuideWindow(self)
        self.guide.show_section(section or self.guide_section())
        return self.guide

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
        """Ask about unsaved changes (Save / Discard / Cancel), stop a running estimate and
        wait for it, remove this document's autosaves, then remember the layout."""
        if not self._close_confirmed and self.session.is_modified():
            event.ignore()
            self.files.confirm_discard(self._close_now, "closing")
            return
        self._close_confirmed = False
        self.files.autosave_timer.stop()
        self.files.discard_recoveries()
        self.study_bar.stop()
        if self.worker.busy:
            self.statusBar().showMessage("Stopping the estimation…")
            QApplication.setOverrideCursor(Qt.CursorShape.WaitCursor)
            try:
                self.worker.wait()
            finally:
                QApplication.restoreOverrideCursor()
        self.save_layout()
        event.accept()

    def _close_now(self) -> None:
        self._close_confirmed = True
        if not self.close():
            self._close_confirmed = False
