"""The study toolbar: whose diary the window shows, and the work across people.

Shown only for a table of many people (desktop.study_state): the person picker (changing
person is an undoable edit), the number of people, "Estimate every person…"
(desktop.batch_dialog) and "Across people" (desktop.across_dialog, kept open beside the
window). Clicking a person in the across view shows that person's diary and their stored
fit from the batch folder (models.personfit's fit document read back as a FitResult, no
refit), on the Results page.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import replace
from pathlib import Path

from PySide6.QtWidgets import QComboBox, QLabel, QMessageBox, QPushButton, QToolBar, QWidget

from lagwise.desktop import style
from lagwise.desktop.across_dialog import AcrossDialog
from lagwise.desktop.batch_dialog import BatchDialog
from lagwise.desktop.session import Session
from lagwise.desktop.study_state import StudyState
from lagwise.models.errors import LagwiseError
from lagwise.models.results import FitResult


class StudyBar(QToolBar):
    """The person picker and the study's commands (see the module docstring)."""

    def __init__(self, session: Session, show_results: Callable[[], None],
                 parent: QWidget | None = None) -> None:
        super().__init__("People", parent)
        self.setObjectName("studyTools")
        self.setMovable(False)
        self.session = session
        self.state = StudyState(session, self)
        self._show_results = show_results
        self.batch: BatchDialog | None = None
        self.across: AcrossDialog | None = None
        self.addWidget(QLabel(" Person: "))
        self.picker = QComboBox()
        self.picker.setObjectName("personPicker")
        self.picker.setAccessibleName("Person shown")
        self.picker.setMinimumContentsLength(10)
        self.picker.setToolTip("Whose diary the pages show and estimate (Edit ▸ Undo goes back "
                               "to the previous person)")
        self.picker.activated.connect(self._picked)
        self.addWidget(self.picker)
        self.count = QLabel()
        self.count.setObjectName("studyPeople")
        self.addWidget(self.count)
        self.estimate_button = QPushButton("Estimate every person…")
        self.estimate_button.setObjectName("estimateEveryone")
        self.estimate_button.setToolTip("Fit this model to every person's diary on its own")
        self.estimate_button.clicked.connect(self.estimate_everyone)
        self.addWidget(self.estimate_button)
        self.across_button = QPushButton("Across people")
        self.across_button.setObjectName("acrossPeople")
        self.across_button.setToolTip("The results of the last 'Estimate every person'")
        self.across_button.clicked.connect(self._across_clicked)
        self.addWidget(self.across_button)
        self.state.changed.connect(self.refresh)
        self.refresh()

    def refresh(self) -> None:
        """Show the bar for a study only, with its people and the person shown."""
        self.setVisible(self.state.active)
        study = self.state.study()
        if study is None:
            return
        self.picker.blockSignals(True)
        self.picker.clear()
        self.picker.addItems([p.person for p in study.people])
        self.picker.setCurrentText(self.state.person)
        self.picker.blockSignals(False)
        refused = sum(p.diary is None for p in study.people)
        self.count.setText(f"  of {len(study)} people"
                           + (f" ({refused} not a diary)  " if refused else "  "))
        self.across_button.setEnabled(bool(self.session.study.batch_folder))

    def choose(self, person: str) -> bool:
        """Show `person`'s diary; False (with a message) when their rows are not a diary."""
        try:
            self.state.choose(person)
        except LagwiseError as error:
            QMessageBox.warning(self, f"Cannot show {person}", style.plain(str(error)))
            self.refresh()
            return False
        return True

    def _picked(self, index: int) -> None:
        self.choose(self.picker.itemText(index))

    def estimate_everyone(self) -> BatchDialog:
        """Open (or raise) the "Estimate every person" dialog."""
        if self.batch is None:
            self.batch = BatchDialog(self.session, self.state, self.window())
            self.batch.finished_batch.connect(self._batch_finished)
        self.batch.refresh()
        self.batch.show()
        self.batch.raise_()
        return self.batch

    def stop(self) -> None:
        """Cancel a running batch and wait for the person being fitted (the window closes)."""
        if self.batch is not None:
            self.batch.worker.wait()

    def _batch_finished(self, folder: str) -> None:
        self.session.set_study(replace(self.session.study, batch_folder=folder))
        self.refresh()
        self.show_across(folder)

    def _across_clicked(self) -> None:
        try:
            self.show_across(self.session.study.batch_folder)
        except LagwiseError as error:
            QMessageBox.warning(self, "Could not open the batch results", style.plain(str(error)))

    def show_across(self, folder: str | Path) -> AcrossDialog:
        """The across-people view of a batch folder, kept open (DataError: not a batch)."""
        across = AcrossDialog(folder, self.window())
        if self.across is not None:
            self.across.close()
        self.across = across
        across.personChosen.connect(self.open_person)
        if self.state.active:
            across.note.setText(f"{across.note.text()} Click a person in the People tab to "
                                "open their results in the window.")
        across.show()
        return across

    def open_person(self, person: str) -> bool:
        """Show `person`'s diary and their stored fit on the Results page; False (with a
        message) when this project's study has no such person or no fit of them."""
        outcome = next(o for o in self.across.outcomes if o.person == person)
        if person not in self.state.people():
            QMessageBox.information(self, "Person not in this project", style.plain(
                f"This project's table holds no person {person}."))
            return False
        if not self.choose(person):
            return False
        if outcome.document is None:
            QMessageBox.information(self, f"{person} was not fitted", style.plain(
                f"{person}: {outcome.status}: {outcome.reason}"))
            return False
        # a new run of the person shown; the batch fitted their diary with the preparation
        # steps of its start, taken to be the present ones
        self.session.set_result(FitResult.from_json(outcome.document, person))
        self._show_results()
        return True
