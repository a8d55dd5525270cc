"""Estimate every person: the window's model and settings fitted to every person of the study.

The dialog sends the study (every person's diary with the session's preparation steps,
models.study.with_steps), the model and the estimator settings to `models.batch.run_batch`
through a worker of its own (desktop.worker), so the window stays usable. Each person's
status is read from their outcome file as it is written (models.batchfiles), with the overall
share of people done; Cancel stops after the person being fitted and keeps the finished ones.
The folder defaults to "<project> people" beside the project file (or beside the data file
before the first save); a rerun into the same folder fits only the people still missing.
"""

from __future__ import annotations

import os
from pathlib import Path

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (
    QDialog, QFileDialog, QFormLayout, QHBoxLayout, QHeaderView, QLabel, QLineEdit,
    QProgressBar, QPushButton, QSpinBox, QTableWidget, QTableWidgetItem, QVBoxLayout, QWidget,
)

from lagwise.desktop import style
from lagwise.desktop.compute_settings import Compute, load_compute, save_compute
from lagwise.desktop.session import Session
from lagwise.desktop.study_state import StudyState
from lagwise.desktop.worker import Worker
from lagwise.models import batchfiles
from lagwise.models.batch import BatchOutcome, person_fingerprints, run_batch
from lagwise.models.errors import SpecError
from lagwise.models.parallel import scheduler_address
from lagwise.models.personfit import BatchSettings, PersonOutcome
from lagwise.models.study import with_steps

WAITING = "waiting"


def default_folder(session: Session) -> Path:
    """'<project> people' beside the project file, else beside the data file."""
    if session.file is not None:
        return session.file.parent / f"{session.file.stem} people"
    data = Path(session.import_settings.path)
    return data.parent / f"{data.stem} people"


class BatchDialog(QDialog):
    """Start, follow and cancel the fit of every person (see the module docstring)."""

    finished_batch = Signal(str)   # the folder of a finished batch

    def __init__(self, session: Session, state: StudyState, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Estimate every person")
        self.setObjectName("batchDialog")
        self.resize(640, 520)
        self.session, self.state = session, state
        self.worker = Worker(self)
        self._folder: Path | None = None
        self._prints: dict[str, str] = {}
        self._build()
        self.worker.progress.connect(self._progress)
        self.worker.done.connect(self._done)
        self.worker.error.connect(lambda message, _details: self._stopped(message))
        self.worker.cancelled.connect(lambda _m: self._stopped("Stopped; the finished people "
                                                               "are kept in the folder."))
        self.worker.idle.connect(self._idle)
        self.refresh()

    def _build(self) -> None:
        layout = QVBoxLayout(self)
        intro = QLabel("The model and estimator settings of this project, fitted to every "
                       "person's diary on its own (with the same preparation steps). Each "
                       "person's result is written to the folder the moment it is done; a "
                       "rerun into the same folder fits only the people still missing.")
        intro.setWordWrap(True)
        layout.addWidget(intro)
        form = QFormLayout()
        row = QHBoxLayout()
        self.folder_edit = QLineEdit()
        self.folder_edit.setObjectName("batchFolder")
        choose = QPushButton("Choose…")
        choose.clicked.connect(self._choose_folder)
        row.addWidget(self.folder_edit, 1)
        row.addWidget(choose)
        form.addRow("Results folder:", row)
        compute = load_compute()
        self.jobs_spin = QSpinBox()
        self.jobs_spin.setRange(1, os.cpu_count() or 1)
        self.jobs_spin.setValue(compute.jobs)
        self.jobs_spin.setToolTip("Worker processes on this computer, one person each at a time.")
        form.addRow("&Worker processes:", self.jobs_spin)
        self.scheduler_edit = QLineEdit(compute.scheduler or "")
        self.scheduler_edit.setObjectName("batchScheduler")
        self.scheduler_edit.setPlaceholderText("empty: this computer; or a Dask scheduler, "
                                               "e.g. tcp://192.168.1.20:8786")
        self.scheduler_edit.setToolTip("The address of a running Dask scheduler: the people are "
                                       "fitted by its workers (kept for next time, as in "
                                       "Model ▸ Computing…)")
        form.addRow("Dask &scheduler:", self.scheduler_edit)
        layout.addLayout(form)
        self.table = QTableWidget(0, 3)
        self.table.setObjectName("batchPeople")
        self.table.setHorizontalHeaderLabels(["Person", "Prompts", "Status"])
        self.table.verticalHeader().setVisible(False)
        self.table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        self.table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        self.table.horizontalHeader().setStretchLastSection(True)
        layout.addWidget(self.table, 1)
        self.progress = QProgressBar()
        self.progress.setRange(0, 1000)
        layout.addWidget(self.progress)
        self.message = QLabel("")
        self.message.setObjectName("batchMessage")
        self.message.setTextFormat(Qt.TextFormat.PlainText)   # it quotes person names
        self.message.setWordWrap(True)
        layout.addWidget(self.message)
        buttons = QHBoxLayout()
        buttons.addStretch(1)
        self.start_button = QPushButton("&Start")
        self.start_button.setObjectName("batchStart")
        self.start_button.clicked.connect(self.start)
        self.cancel_button = QPushButton("&Cancel")
        self.cancel_button.setObjectName("batchCancel")
        self.cancel_button.clicked.connect(self.worker.cancel)
        self.cancel_button.setEnabled(False)
        close = QPushButton("Close")
        close.setToolTip("Close (a running batch stops; the finished people are kept)")
        close.clicked.connect(self.close)
        for button in (self.start_button, self.cancel_button, close):
            buttons.addWidget(button)
        layout.addLayout(buttons)

    def refresh(self) -> None:
        """The people of the study, waiting; the folder of the last batch or the default."""
        study = self.state.study()
        choice = self.session.study
        if not self.folder_edit.text():
            folder = choice.batch_folder if choice and choice.batch_folder else None
            self.folder_edit.setText(str(folder or default_folder(self.session)))
        people = () if study is None else study.people
        self.table.setRowCount(len(people))
        for r, entry in enumerate(people):
            prompts = "" if entry.diary is None else str(entry.diary.n_occasions)
            for c, text in enumerate((entry.person, prompts, WAITING)):
                self.table.setItem(r, c, QTableWidgetItem(text))

    def start(self) -> bool:
        """Fit every person; False (with the reason shown) when it cannot start."""
        _notes, problem = self.session.validation()
        if self.session.spec.k == 0 or problem:
            self._stopped(problem or "Build a model first (States page).")
            return False
        try:
            compute = Compute(self.jobs_spin.value(), scheduler_address(self.scheduler_edit.text()))
        except SpecError as error:
            self._stopped(str(error))
            return False
        save_compute(compute)
        study = with_steps(self.state.study(), self.session.preparation)
        settings = BatchSettings(self.session.spec, self.session.options)
        self._folder = Path(self.folder_edit.text().strip())
        self._prints = person_fingerprints(study, settings)
        self.refresh()
        self.progress.setValue(0)
        self.message.setStyleSheet("")
        self.message.setText(f"Fitting {len(study)} people…")
        self.start_button.setEnabled(False)
        self.cancel_button.setEnabled(True)
        self.worker.start(run_batch, study, settings, self._folder, jobs=compute.jobs,
                          scheduler=compute.scheduler, job="batch")
        return True

    def statuses(self) -> dict[str, str]:
        """Person -> status as the table shows it."""
        return {self.table.item(r, 0).text(): self.table.item(r, 2).text()
                for r in range(self.table.rowCount())}

    def _progress(self, fraction: float, message: str) -> None:
        self.progress.setValue(round(1000 * fraction))
        self.message.setText(message)
        for r in range(self.table.rowCount()):
            person = self.table.item(r, 0).text()
            if self.table.item(r, 2).text() == WAITING and person in self._prints:
                stored = batchfiles.load_outcome(self._folder, person, self._prints[person])
                if stored is not None:
                    _show_status(self.table.item(r, 2), _status(stored))

    def _done(self, outcome: BatchOutcome) -> None:
        status = {o.person: _status(o) for o in outcome.outcomes}
        for r in range(self.table.rowCount()):
            item = self.table.item(r, 2)
            _show_status(item, status.get(self.table.item(r, 0).text(), item.text()))
        self.progress.setValue(1000)
        fitted = len(outcome.outcomes) - len(outcome.not_fitted)
        self.message.setText(f"{fitted} of {len(outcome.outcomes)} people fitted "
                             f"({len(outcome.reused)} already done); results in {self._folder}.")
        self.finished_batch.emit(str(self._folder))

    def _stopped(self, message: str) -> None:
        self.message.setText(message)
        self.message.setStyleSheet(f"color: {style.WARNING};")

    def _idle(self) -> None:
        self.start_button.setEnabled(True)
        self.cancel_button.setEnabled(False)

    def _choose_folder(self) -> None:
        folder = QFileDialog.getExistingDirectory(self, "Results folder", self.folder_edit.text())
        if folder:
            self.folder_edit.setText(folder)

    def closeEvent(self, event) -> None:   # noqa: N802 - Qt's name
        self.worker.wait()
        super().closeEvent(event)


def _status(outcome: PersonOutcome) -> str:
    """'fitted', or the status with its reason ('failed: too few complete lag windows ...')."""
    return outcome.status if outcome.fitted else f"{outcome.status}: {outcome.reason}"


def _show_status(item: QTableWidgetItem, text: str) -> None:
    item.setText(text)
    item.setToolTip(text)   # a long reason is cut at the table's edge
