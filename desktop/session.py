"""The document the window edits: the diary, how it was imported, its preparation steps,
the model, the runs (every estimate, models.runs; one of them current) and the project notes.

A `Session` holds immutable values only (Diary, ImportSettings, preparation Steps,
ModelSpec, FitOptions, FitResult) and announces every change through Qt signals; views
subscribe to it. Every edit of the model, the steps or the notes goes through the undo stack
as a command that swaps one immutable value for another, so undo and redo are exact and
cheap; so do renaming, annotating, deleting and reopening runs. Every finished estimate
appends a run and makes it current. A running estimate gets a `snapshot()` of the values (the
diary with the steps applied), never the session itself.

The session is also the project document (models.project.Project): `to_project` and
`load_project` convert, and `is_modified` says whether it differs from its file (an undoable
edit since the last save, a new import or a new result).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from pathlib import Path

from PySide6.QtCore import QObject, QTimer, Signal, Slot
from PySide6.QtGui import QUndoCommand, QUndoStack

from lagwise.models.diary import Diary, TimeSettings
from lagwise.models.errors import SpecError
from lagwise.models.names import without_unsafe
from lagwise.models.preparation import Step, apply_steps, steps_from_json, steps_to_json
from lagwise.models.project import (
    Project, ProjectData, data_fingerprint, embed_table, project_diary, table_digest, utc_now,
)
from lagwise.models.results import FitResult
from lagwise.models.runs import (
    Run, add_run, annotate_run, checked_name, find_run, free_name, new_run, next_name,
    rename_run, tests_result, update_run,
)
from lagwise.models.estimators import FitOptions
from lagwise.models.spec import ModelSpec
from lagwise.models.study import StudyChoice, person_rows
from lagwise.models.recipe import DiaryRecipe


@dataclass(frozen=True)
class ImportSettings:
    """How the diary was made from its file: item columns, time settings, missing codes.

    prompts_per_day: the schedule of a grid diary (None: the highest prompt number seen).
    scales: (item, (low, high)) answer scales the user stated (models.scales).
    """

    path: str
    items: tuple[str, ...]
    time: TimeSettings
    missing_codes: tuple[str, ...] = ()
    prompts_per_day: int | None = None
    scales: tuple[tuple[str, tuple[float, float]], ...] = ()

    @property
    def recipe(self) -> DiaryRecipe:
        """How the imported table becomes the diary (models.recipe)."""
        return DiaryRecipe(self.items, self.time, self.missing_codes, self.prompts_per_day,
                           self.scales)


@dataclass(frozen=True)
class Snapshot:
    """Frozen inputs of one estimate.

    diary: the prepared diary the estimate uses (`raw` with the `preparation` steps applied);
    raw: the diary as imported (None: the same as `diary`);
    fingerprint: of the data, recipe and steps (models.project.data_fingerprint; "": unknown).
    """

    diary: Diary
    spec: ModelSpec
    options: FitOptions
    preparation: tuple[Step, ...] = ()
    raw: Diary | None = None
    fingerprint: str = ""

    @property
    def source(self) -> Diary:
        """The imported diary the estimate was prepared from."""
        return self.raw if self.raw is not None else self.diary


EMPTY_SPEC = ModelSpec(states=())


class Session(QObject):
    """The editable document; see the module docstring."""

    dataChanged = Signal()      # diary or import settings replaced
    specChanged = Signal()      # model specification replaced
    optionsChanged = Signal()   # estimator settings replaced
    resultChanged = Signal()    # another current run (a new estimate, reopened, none)
    runsChanged = Signal()      # the runs were added, renamed, annotated or deleted
    preparationChanged = Signal()  # preparation steps replaced
    notesChanged = Signal()     # project notes replaced
    fileChanged = Signal()      # the project file (and so the name) changed
    modifiedChanged = Signal(bool)  # unsaved changes appeared or were saved
    documentReplaced = Signal()  # a new import, an opened project, or File > New

    def __init__(self, parent: QObject | None = None) -> None:
        super().__init__(parent)
        self.undo_stack = QUndoStack(self)
        self._frame = None
        self._diary: Diary | None = None
        self._import: ImportSettings | None = None
        self._spec: ModelSpec = EMPTY_SPEC
        self._options = FitOptions()
        self._runs: tuple[Run, ...] = ()
        self._current: str | None = None   # the current run's name
        self._responses = None     # what the Responses tab shows (models.responses.ResponseChoice)
        self._digest: tuple[object, str | None] | None = None  # (data, table_digest) cache
        self._stale = None         # a result opened as out of date (saved so in its project)
        self._numbered = 0         # default run names start at "Run N" with N this or more
        self._preparation: tuple[Step, ...] = ()
        self._prepared: tuple[Diary, tuple[Step, ...], Diary] | None = None  # cache
        self._data: ProjectData | None = None
        self._notes = ""
        self._study: StudyChoice | None = None   # many people: desktop.study_state
        self._file: Path | None = None
        self._created = ""
        self._untitled = "untitled"
        self._unsaved = False
        self._document = 0
        self.undo_stack.cleanChanged.connect(self._clean_changed)
        # a reopened project's results are announced by a timer, so the event loop serves
        # painting and other timers between showing the diary and showing the results
        self._announcer = QTimer(self)
        self._announcer.setSingleShot(True)
        self._announcer.setInterval(0)
        self._announcer.timeout.connect(self.resultChanged)

    # ----- reading -------------------------------------------------------------------
    @property
    def diary(self) -> Diary | None:
        return self._diary

    @property
    def import_settings(self) -> ImportSettings | None:
        return self._import

    @property
    def study(self) -> StudyChoice | None:
        """The person column, the person shown and the batch folder (None: one person)."""
        return self._study

    @property
    def data(self) -> ProjectData | None:
        """The project's raw table (every person's rows) and where it came from."""
        return self._data

    @property
    def spec(self) -> ModelSpec:
        return self._spec

    @property
    def options(self) -> FitOptions:
        return self._options

    @property
    def runs(self) -> tuple[Run, ...]:
        """Every estimate kept, oldest first."""
        return self._runs

    @property
    def current_run(self) -> Run | None:
        return None if self._current is None else find_run(self._runs, self._current)

    @property
    def result(self) -> FitResult | None:
        """The current run's result."""
        run = self.current_run
        return None if run is None else run.result

    @property
    def items(self) -> tuple[str, ...]:
        return () if self._diary is None else self._diary.items

    @property
    def announcing(self) -> bool:
        """A reopened project's results are still to be announced (resultChanged)."""
        return self._announcer.isActive()

    @property
    def preparation(self) -> tuple[Step, ...]:
        """The preparation steps applied to the diary before estimation, in order."""
        return self._preparation

    def prepared_diary(self) -> Diary | None:
        """The diary with the preparation steps applied (models.preparation.apply_steps).

        Raises DataError when a step cannot be applied to the present diary.
        """
        if self._diary is None:
            return None
        if not self._preparation:
            return self._diary
        cached = self._prepared
        if cached is not None and cached[0] is self._diary and cached[1] == self._preparation:
            return cached[2]
        prepared = apply_steps(self._diary, self._preparation)
        self._prepared = (self._diary, self._preparation, prepared)
        return prepared

    def snapshot(self) -> Snapshot | None:
        """The frozen inputs for an estimate (None while no diary is loaded).

        Its diary is the prepared one; raises DataError when a step cannot be applied.
        """
        if self._diary is None:
            return None
        return Snapshot(self.prepared_diary(), self._spec, self._options, self._preparation,
                        self._diary, self.fingerprint())

    def fingerprint(self) -> str:
        """The fingerprint of the present data, recipe, preparation steps and person shown
        (models.project; the table is hashed once per data source)."""
        if self._digest is None or self._digest[0] is not self._data:
            self._digest = (self._data, table_digest(self._data))
        recipe = self._import.recipe if self._import is not None else None
        return data_fingerprint(self._digest[1], recipe or DiaryRecipe(),
                                steps_to_json(self._preparation),
                                None if self._study is None else self._study.person)

    def result_is_current(self) -> bool:
        """True when the current run was estimated from the present data, recipe and
        preparation steps (its fingerprint), model and settings."""
        run = self.current_run
        return (run is not None and self._diary is not None and run.result is not self._stale
                and run.fingerprint == self.fingerprint()
                and run.spec == self._spec and run.options == self._options)

    def validation(self) -> tuple[list[str], str | None]:
        """Plain-word notes on the model and the one problem that blocks estimation, if any."""
        try:
            notes = self._spec.validate(self.items if self._diary is not None else None)
        except SpecError as exc:
            return [], str(exc)
        return notes, None

    # ----- replacing the whole document ----------------------------------------------
    def load_data(self, frame, diary: Diary, settings: ImportSettings,
                  spec: ModelSpec | None = None, options: FitOptions | None = None,
                  preparation: tuple[Step, ...] = (), notes: str | None = None,
                  data: ProjectData | None = None, study: StudyChoice | None = None) -> None:
        """Start on a new diary: a new, untitled project whose model is reset (or set to
        `spec`), preparation steps set to `preparation` and undo history cleared. The new
        diary counts as unsaved.

        data: where the table came from, as a project stores it (None: embedded from `frame`
        and `settings.path`); study: for a table of many people, `frame` and `diary` are the
        rows and diary of `study.person`.
        """
        self.undo_stack.clear()
        self._frame = frame
        self._diary = diary
        self._import = settings
        self._data = data if data is not None else embed_table(frame, settings.path)
        self._study = study
        self._spec = spec if spec is not None else EMPTY_SPEC
        if options is not None:
            self._options = options
        self._preparation = tuple(preparation)
        if notes is not None:
            self._notes = notes
        self._runs, self._current, self._stale, self._numbered = (), None, None, 0
        self._untitled = "untitled"
        if self._file is not None:  # a new diary starts a new, untitled project
            self._file, self._created = None, ""
            self.fileChanged.emit()
        self._set_unsaved(True)
        self._emit_all()

    def clear(self) -> None:
        """An empty, untitled document (File > New)."""
        self.undo_stack.clear()
        self._frame = self._diary = self._import = self._data = None
        self._spec, self._options = EMPTY_SPEC, FitOptions()
        self._preparation, self._notes, self._study = (), "", None
        self._runs, self._current, self._stale, self._numbered = (), None, None, 0
        self._file, self._created, self._untitled = None, "", "untitled"
        self.fileChanged.emit()
        self._set_unsaved(False)
        self._emit_all()

    def set_result(self, result: FitResult, inputs: Snapshot | None = None) -> None:
        """Keep `result`, estimated from `inputs` (None: the present data and steps), as a new
        run and make it current (not an edit: it is not undoable, but the document counts as
        unsaved)."""
        fingerprint = inputs.fingerprint if inputs is not None and inputs.fingerprint else \
            self.fingerprint()
        steps = self._preparation if inputs is None else inputs.preparation
        name = next_name(self._runs, self._numbered)
        run = new_run(self._runs, result, fingerprint, utc_now(), tuple(steps_to_json(steps)),
                      name=name)
        self._runs, self._current = add_run(self._runs, run), run.name
        self._numbered = int(name.removeprefix("Run ")) + 1
        self._set_unsaved(True)
        self.runsChanged.emit()
        self.resultChanged.emit()

    @property
    def bootstrap(self):
        """The bootstrap of the current run, or None."""
        run = self.current_run
        return None if run is None else run.bootstrap

    def set_bootstrap(self, boot) -> None:
        """Keep a finished bootstrap of the current run's result (saved with the project)."""
        self._runs = update_run(self._runs, self._current, bootstrap=boot)
        self._set_unsaved(True)
        self.runsChanged.emit()

    def set_lag2(self, check, inputs: Snapshot | None) -> None:
        """Keep a finished lag-2 check with the current run when it tested that run's lag-1
        model on the run's data and steps (models.runs.tests_result)."""
        run = self.current_run
        if (run is None or inputs is None or inputs.fingerprint != run.fingerprint
                or not tests_result(check, run.result)):
            return
        self._runs = update_run(self._runs, run.name, lag2=check)
        self._set_unsaved(True)
        self.runsChanged.emit()

    @property
    def responses(self):
        """What the Responses tab shows (models.responses.ResponseChoice), or None."""
        return self._responses

    def set_responses(self, choice) -> None:
        """Keep what the Responses tab shows (saved with the project, with a result)."""
        if choice != self._responses:
            self._responses = choice
            if self._current is not None:
                self._set_unsaved(True)

    @property
    def document(self) -> int:
        """A number that changes whenever the whole document is replaced (an import, an
        opened project, New): a run started on an earlier document is not shown."""
        return self._document

    def _emit_all(self) -> None:
        self._document += 1
        self.documentReplaced.emit()
        for signal in (self.dataChanged, self.specChanged, self.optionsChanged,
                       self.preparationChanged, self.notesChanged, self.runsChanged,
                       self.resultChanged):
            signal.emit()

    # ----- project files -------------------------------------------------------------
    @property
    def file(self) -> Path | None:
        """The project file the document was opened from or last saved to (None: untitled)."""
        return self._file

    @property
    def name(self) -> str:
        """The project's name for the window title ('untitled' before the first save)."""
        return self._file.stem if self._file is not None else self._untitled

    def set_untitled_name(self, name: str) -> None:
        """The name shown while the document has no file (for example 'demo')."""
        self._untitled = name
        self.fileChanged.emit()

    @property
    def notes(self) -> str:
        return self._notes

    def is_modified(self) -> bool:
        """True when the document differs from its file: an undoable edit since the last save,
        a new import or a new result."""
        return self._unsaved or not self.undo_stack.isClean()

    def to_project(self) -> Project:
        """The document as a models.project.Project (to save or autosave)."""
        settings = self._import
        spec = self._spec if self._spec.k > 0 else None
        return Project(
            data=self._data,
            items=None if settings is None else settings.items,
            time=TimeSettings() if settings is None else settings.time,
            missing_codes=() if settings is None else settings.missing_codes,
            prompts_per_day=None if settings is None else settings.prompts_per_day,
            scales=() if settings is None else settings.scales,
            preparation=tuple(steps_to_json(self._preparation)),
            spec=spec, options=self._options, runs=self._runs, current_run=self._current,
            result_current=self._current is None or self.result_is_current(),
            responses=None if self._current is None else self._responses, notes=self._notes,
            study=self._study, created=self._created, file=self._file)

    def load_project(self, project: Project, table, saved: bool = True,
                     diaries: tuple[Diary, Diary] | None = None) -> None:
        """Put an opened project into the session: its data (`table`: the project's raw
        table, models.project.project_table), steps, model, settings, notes and stored
        results, shown without refitting.

        `diaries`: the project's diary before and after its steps when already built (a
        worker reads projects); otherwise the diary is rebuilt and the steps tried here, before
        anything changes, so a DataError leaves the session untouched. `saved` False (a
        restored autosave): the document counts as unsaved. The stored results are announced
        (resultChanged) in the next turn of the event loop, so the window answers between
        showing the diary and showing the results.
        """
        steps = steps_from_json(list(project.preparation))
        if diaries is None:
            raw = project_diary(project, table, prepared=False)
            diaries = (raw, apply_steps(raw, steps) if steps else raw)
        raw, prepared = diaries
        data = project.data
        source = str(data.link) if data is not None and data.link is not None else (
            data.file_name if data is not None else "table")
        settings = ImportSettings(path=source, items=raw.items, time=project.time,
                                  missing_codes=tuple(project.missing_codes),
                                  prompts_per_day=project.prompts_per_day,
                                  scales=project.scales)
        if data is not None and data.table is None:
            data = replace(data, table=table)
        study = project.study
        rows = table if study is None else person_rows(table, study.person_column, study.person)
        self.load_data(rows, raw, settings, spec=project.spec or EMPTY_SPEC,
                       options=project.options, preparation=steps, notes=project.notes,
                       data=data, study=study)
        self._prepared = (raw, self._preparation, prepared)
        self._file, self._created = project.file, project.created
        self.fileChanged.emit()
        if project.runs:
            self._runs, self._current = project.runs, project.current_run
            self._stale = None if project.result_current else project.result
            self._responses = project.responses
            self._set_unsaved(True)
            self.runsChanged.emit()
            self._announcer.start()
        if saved:
            self.mark_saved(project.file)

    def mark_saved(self, file: Path | None, created: str | None = None) -> None:
        """The document now equals the project file `file` (after a save or an open)."""
        if file != self._file:
            self._file = file
            self.fileChanged.emit()
        if created is not None:
            self._created = created
        self.undo_stack.setClean()
        self._set_unsaved(False)

    @Slot(bool)
    def _clean_changed(self, _clean: bool) -> None:
        self.modifiedChanged.emit(self.is_modified())

    def _set_unsaved(self, unsaved: bool) -> None:
        self._unsaved = unsaved
        self.modifiedChanged.emit(self.is_modified())

    # ----- undoable edits ------------------------------------------------------------
    def edit_spec(self, spec: ModelSpec, text: str) -> None:
        """Replace the model specification (undoable); no-op when nothing changes."""
        if spec != self._spec:
            self.undo_stack.push(_Swap(self, "_spec", self.specChanged, self._spec, spec, text))

    def edit_options(self, options: FitOptions, text: str) -> None:
        """Replace the estimator settings (undoable)."""
        if options != self._options:
            self.undo_stack.push(_Swap(self, "_options", self.optionsChanged, self._options,
                                       options, text))

    def edit_time(self, time: TimeSettings, text: str) -> None:
        """Change the time settings (for example the night rule) and rebuild the diary.

        The diary is rebuilt by the data layer from the imported table; a DataError leaves
        the session untouched.
        """
        if self._import is None or time == self._import.time:
            return
        settings = replace(self._import, time=time)
        diary = settings.recipe.diary(self._frame, source=settings.path)
        self.undo_stack.push(_DataSwap(self, (self._import, self._diary), (settings, diary), text))

    def set_preparation(self, steps, text: str) -> None:
        """Replace the preparation steps (undoable); no-op when nothing changes.

        The steps are tried on the diary first: a DataError leaves the session untouched.
        """
        steps = tuple(steps)
        if steps == self._preparation:
            return
        if self._diary is not None and steps:
            apply_steps(self._diary, steps)
        self.undo_stack.push(_Swap(self, "_preparation", self.preparationChanged,
                                   self._preparation, steps, text))

    def rename_run(self, name: str, new_name: str) -> None:
        """Rename a run (undoable); ProjectError for an empty, repeated or unsafe name."""
        new = checked_name(new_name, self._runs, renaming=name)
        find_run(self._runs, name)
        if new != name:
            self._edit_runs(f"Rename run '{name}'", _renaming(name, new), _renaming(new, name))

    def annotate_run(self, name: str, note: str) -> None:
        """Replace a run's note (undoable; unsafe characters left out, models.names)."""
        old = find_run(self._runs, name).note
        new = find_run(annotate_run(self._runs, name, note), name).note
        if new != old:
            self._edit_runs(f"Note on run '{name}'", _noting(name, new), _noting(name, old))

    def delete_run(self, name: str) -> None:
        """Delete a run (undoable); deleting the current run makes the newest remaining run
        current (none when no run remains)."""
        find_run(self._runs, name)
        kept: dict = {}

        def forward(runs, current):
            index = [run.name for run in runs].index(name)
            kept.update(run=runs[index], index=index, current=current == name)
            rest = runs[:index] + runs[index + 1:]
            if current == name:
                current = rest[-1].name if rest else None
            return rest, current

        def backward(runs, current):
            run = kept["run"]
            if any(other.name == run.name for other in runs):  # the name was given again
                run = replace(run, name=free_name(runs, run.name))
            index = kept["index"]
            return runs[:index] + (run,) + runs[index:], run.name if kept["current"] else current

        self._edit_runs(f"Delete run '{name}'", forward, backward)

    def reopen_run(self, name: str) -> None:
        """Make a run current and its specification and settings the model (one undoable
        step)."""
        run = find_run(self._runs, name)
        before = self._current
        self.undo_stack.beginMacro(f"Reopen run '{name}'")
        self.edit_spec(run.spec, f"Model of run '{name}'")     # first: the run's result is
        self.edit_options(run.options, f"Settings of run '{name}'")   # then shown with its model
        self._edit_runs(f"Show run '{name}'", lambda runs, _: (runs, name),
                        lambda runs, _: (runs, before))
        self.undo_stack.endMacro()

    def _edit_runs(self, text: str, forward, backward) -> None:
        self.undo_stack.push(_RunsEdit(self, text, forward, backward))

    def _set_runs(self, runs: tuple[Run, ...], current: str | None) -> None:
        shown = self.result
        self._runs, self._current = runs, current
        self.runsChanged.emit()
        if self.result is not shown:
            self.resultChanged.emit()

    def set_notes(self, notes: str, text: str = "Project notes") -> None:
        """Replace the project notes (undoable); characters a project may not hold (control
        characters but line breaks and tabs, models.names) are left out."""
        notes = without_unsafe(notes)
        if notes != self._notes:
            self.undo_stack.push(_Swap(self, "_notes", self.notesChanged, self._notes, notes,
                                       text))

    def set_study(self, study: StudyChoice) -> None:
        """Keep another batch folder (not an edit: not undoable, but unsaved)."""
        self._study = study
        self._set_unsaved(True)

    # ----- used by the commands ------------------------------------------------------
    def show_person(self, study: StudyChoice, frame, diary: Diary,
                    current: str | None = None) -> tuple:
        """Show another person's rows and diary with run `current` (desktop.study_state's
        undoable change; the runs stay). Returns the replaced (study, frame, diary, current)."""
        old = (self._study, self._frame, self._diary, self._current)
        self._study, self._frame, self._diary, self._current = study, frame, diary, current
        self._stale = None
        self.dataChanged.emit()
        self.runsChanged.emit()
        self.resultChanged.emit()
        return old

    def _set_data(self, settings: ImportSettings, diary: Diary) -> None:
        self._import, self._diary = settings, diary
        self.dataChanged.emit()


class _Swap(QUndoCommand):
    """Swap one immutable attribute of the session between two values."""

    def __init__(self, session: Session, attribute: str, signal, old, new, text: str) -> None:
        super().__init__(text)
        self._session, self._attribute, self._signal = session, attribute, signal
        self._old, self._new = old, new

    def redo(self) -> None:
        setattr(self._session, self._attribute, self._new)
        self._signal.emit()

    def undo(self) -> None:
        setattr(self._session, self._attribute, self._old)
        self._signal.emit()


class _RunsEdit(QUndoCommand):
    """An edit of the runs: `forward` and `backward` map (runs, current name) to new ones and
    are applied to the runs as they are when it is done or undone, so runs added meanwhile by
    estimates (which are not undoable) stay."""

    def __init__(self, session: Session, text: str, forward, backward) -> None:
        super().__init__(text)
        self._session, self._forward, self._backward = session, forward, backward

    def redo(self) -> None:
        self._session._set_runs(*self._forward(self._session._runs, self._session._current))

    def undo(self) -> None:
        self._session._set_runs(*self._backward(self._session._runs, self._session._current))


def _renaming(old: str, new: str):
    """The runs with run `old` named `new` (left as they are when `new` was taken meanwhile)."""
    def rename(runs, current):
        if any(run.name == new for run in runs) or not any(run.name == old for run in runs):
            return runs, current
        return rename_run(runs, old, new), new if current == old else current
    return rename


def _noting(name: str, note: str):
    return lambda runs, current: (update_run(runs, name, note=note), current)


class _DataSwap(QUndoCommand):
    """Swap the (import settings, diary) pair, e.g. when the night rule changes."""

    def __init__(self, session: Session, old: tuple, new: tuple, text: str) -> None:
        super().__init__(text)
        self._session, self._old, self._new = session, old, new

    def redo(self) -> None:
        self._session._set_data(*self._new)

    def undo(self) -> None:
        self._session._set_data(*self._old)
