"""The study behind the window: a table of many people, one of whom the pages show.

The session keeps what a project saves of the study (models.study.StudyChoice: the person
column, the person shown, the batch folder) and the shown person's rows and diary;
`StudyState` builds every person's diary from the session's table and import settings when
asked (cached until they change) and changes the person shown. Changing person is an
undoable edit (Edit > Undo goes back to the previous person and their run); the model, the
settings, the preparation steps and the runs stay, and no run is current for the new person.
"""

from __future__ import annotations

from dataclasses import replace

from PySide6.QtCore import QObject, Signal
from PySide6.QtGui import QUndoCommand

from lagwise.desktop.session import Session
from lagwise.models.study import Study, person_rows, study_from_frame


class StudyState(QObject):
    """The people of the session's table and the person shown (see the module docstring)."""

    changed = Signal()   # a new document, new import settings or another person

    def __init__(self, session: Session, parent: QObject | None = None) -> None:
        super().__init__(parent)
        self.session = session
        self._cache: tuple[tuple, Study] | None = None
        session.documentReplaced.connect(self.changed)
        session.dataChanged.connect(self.changed)

    @property
    def active(self) -> bool:
        """True when the session's table holds many people."""
        return self.session.study is not None

    @property
    def person(self) -> str | None:
        return None if self.session.study is None else self.session.study.person

    def study(self) -> Study | None:
        """Every person's diary, made with the session's import settings (None: one person)."""
        s = self.session
        choice, data, settings = s.study, s.data, s.import_settings
        if choice is None or data is None or data.table is None or settings is None:
            return None
        key = (data.table, settings.recipe, choice.person_column)
        cached = self._cache
        if cached is not None and cached[0][0] is key[0] and cached[0][1:] == key[1:]:
            return cached[1]
        study = study_from_frame(data.table, settings.recipe, choice.person_column,
                                 source=settings.path)
        self._cache = (key, study)
        return study

    def people(self) -> tuple[str, ...]:
        study = self.study()
        return () if study is None else tuple(p.person for p in study.people)

    def choose(self, person: str) -> None:
        """Show `person` (undoable); DataError when their rows are not a diary."""
        s = self.session
        choice = s.study
        if choice is None or person == choice.person:
            return
        source = f"{s.import_settings.path}, {choice.person_column} {person}"
        rows = person_rows(s.data.table, choice.person_column, person, s.import_settings.path)
        diary = s.import_settings.recipe.diary(rows, source=source)
        s.undo_stack.push(_PersonChange(s, (replace(choice, person=person), rows, diary),
                                        f"Show person {person}"))


class _PersonChange(QUndoCommand):
    """Show another person of the study (no run current); undo shows the previous one and
    their current run again."""

    def __init__(self, session: Session, new: tuple, text: str) -> None:
        super().__init__(text)
        self._session, self._new, self._old = session, new, None

    def redo(self) -> None:
        self._old = self._session.show_person(*self._new)

    def undo(self) -> None:
        self._session.show_person(*self._old)
