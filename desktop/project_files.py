"""Project files in the window: New, Open, Save, Save As, Open Recent, the unsaved-changes
question, autosave to a recovery file and the offer to restore one after a crash.

Everything about the file itself (format, atomic saving, checks on opening, linked data,
recovery files) is models.project; this module only asks the user and reports. A problem
with a file becomes a dialog and the document in the window is left as it was.

The unsaved-changes question is window-modal and asynchronous (`QMessageBox.open`): the
action that needs it (closing, New, Open) runs when the user answers Save (and the save
succeeds) or Discard, and not at all on Cancel.

Opening reads and checks the file, reads its data and builds its diary in a worker of its own
(`read_project`, so a running estimate goes on); the window then asks what it must ask and
shows the project. `reading` is True meanwhile.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any, Callable

from PySide6.QtCore import QObject, QSettings, Qt, QTimer, Signal
from PySide6.QtWidgets import QFileDialog, QMessageBox, QWidget

from lagwise.desktop.import_dialog import FILE_FILTER
from lagwise.desktop.session import Session
from lagwise.desktop.style import plain
from lagwise.desktop.worker import Worker
from lagwise.models.atomic import remove_stale_temporaries
from lagwise.models.errors import LagwiseError, ProjectError
from lagwise.models.diary import Diary
from lagwise.models.preparation import apply_steps, steps_from_json
from lagwise.models.progress import Monitor, checkpoint
from lagwise.models.project import (
    SUFFIX, LinkedDataChanged, LinkedDataMissing, Project, Recovery, discard_recovery,
    find_recoveries, open_project, project_diary, project_table, relink_data, save_project,
    write_recovery,
)

AUTOSAVE_MS = 3 * 60 * 1000          # autosave every three minutes while there are changes
MAX_RECENT = 8
SETTINGS_RECENT = "project/recent"
SETTINGS_FOLDER = "project/folder"
PROJECT_FILTER = f"Lagwise projects (*{SUFFIX});;All files (*)"

Button = QMessageBox.StandardButton


@dataclass(frozen=True)
class ReadProject:
    """A project file read off the window's thread: the project, its raw table and its diary
    (before and after the preparation steps), or the linked-data problem to ask the user about
    (then the table and the diaries are None)."""

    project: Project
    table: Any
    diaries: tuple[Diary, Diary] | None = None
    problem: LinkedDataMissing | LinkedDataChanged | None = None


def read_project(path: Path, monitor: Monitor | None = None) -> ReadProject:
    """Read and check a project file, read its data and build its diary (the window's thread
    then only shows it); ProjectError when the file is unusable. Runs in a worker."""
    remove_stale_temporaries(path)  # left beside it by a save that was killed
    project = open_project(path)
    checkpoint(monitor, 0.5, "Reading the data")
    try:
        table = project_table(project)
        raw = project_diary(project, table, prepared=False)
    except (LinkedDataMissing, LinkedDataChanged) as exc:
        return ReadProject(project, None, problem=exc)
    steps = steps_from_json(list(project.preparation))
    return ReadProject(project, table, (raw, apply_steps(raw, steps) if steps else raw))


class ProjectFiles(QObject):
    """The project-file commands of one window over its Session (see module docstring)."""

    recentChanged = Signal()
    opened = Signal()  # a project (or a restored autosave) replaced the document

    def __init__(self, window: QWidget, session: Session) -> None:
        super().__init__(window)
        self._window = window
        self._session = session
        self._recoveries: set[Path] = set()  # autosaves of this document, removed on save/close
        self.question: QMessageBox | None = None  # the pending unsaved-changes question
        self.reader = Worker(self)                # reads project files off the window's thread
        self.reader.done.connect(self._read_done)
        self.reader.error.connect(self._read_error)
        self._reading: Path | None = None
        self.autosave_timer = QTimer(self)
        self.autosave_timer.setInterval(AUTOSAVE_MS)
        self.autosave_timer.timeout.connect(self.autosave)
        self.autosave_timer.start()

    # ----- the unsaved-changes question ------------------------------------------------
    def confirm_discard(self, then: Callable[[], None], doing: str) -> None:
        """Run `then` now when nothing is unsaved; otherwise ask Save / Discard / Cancel first.

        `doing` completes "Save the changes to NAME before ...?".
        """
        if not self._session.is_modified():
            then()
            return
        if self.question is not None:  # already asking
            self.question.raise_()
            return
        box = QMessageBox(QMessageBox.Icon.Warning, "Unsaved changes",
                          f"Save the changes to “{self._session.name}” before {doing}?",
                          Button.Save | Button.Discard | Button.Cancel, self._window)
        box.setObjectName("unsavedChangesBox")
        box.setInformativeText("Your changes are lost if you don't save them.")
        box.setDefaultButton(Button.Save)
        box.setEscapeButton(Button.Cancel)
        box.setWindowModality(Qt.WindowModality.WindowModal)

        def answered(_code: int) -> None:
            self.question = None
            choice = box.standardButton(box.clickedButton()) if box.clickedButton() else Button.Cancel
            box.deleteLater()
            if choice == Button.Save and not self.save():
                return
            if choice in (Button.Save, Button.Discard):
                then()

        box.finished.connect(answered)
        self.question = box
        box.open()

    # ----- New, Open --------------------------------------------------------------------
    def new(self) -> None:
        """File > New: an empty, untitled document (after the unsaved-changes question)."""
        self.confirm_discard(self._new_now, "starting a new project")

    def _new_now(self) -> None:
        self.discard_recoveries()
        self._session.clear()

    @property
    def reading(self) -> bool:
        """A project file is being read (see `open`)."""
        return self.reader.busy

    def open(self, path: str | Path | None = None) -> bool:
        """File > Open: read a project (choosing it unless `path` is given) in the worker;
        then sort out linked data that moved or changed and replace the document after the
        unsaved-changes question. False when no file was chosen."""
        if path is None:
            path, _ = QFileDialog.getOpenFileName(self._window, "Open a project",
                                                  self._folder(), PROJECT_FILTER)
            if not path:
                return False
        self._reading = Path(path)
        self._say(f"Opening {self._reading.name}…")
        self.reader.start(read_project, self._reading, job="open")
        return True

    def _read_done(self, read: ReadProject) -> None:
        ready = ((read.project, read.table, False) if read.problem is None
                 else self._with_table(read.project))
        if ready is None:
            return
        project, table, relinked = ready
        diaries = read.diaries if read.problem is None else None
        self.confirm_discard(lambda: self._load(project, table, not relinked, diaries),
                             "opening another project")

    def _read_error(self, message: str, _details: str) -> None:
        QMessageBox.warning(self._window, "Could not open the project", plain(message))
        if self._reading is not None and not self._reading.exists():
            self._forget_recent(self._reading)

    def _with_table(self, project: Project):
        """(project, its raw table, relinked?) or None; linked data that moved or changed is
        located or accepted by asking the user; the diary is checked to build."""
        relinked = False
        while True:
            try:
                table = project_table(project)
                project_diary(project, table)
                return project, table, relinked
            except LinkedDataMissing as exc:
                located = self._locate(exc)
                if located is None:
                    return None
                project, relinked = located, True
            except LinkedDataChanged as exc:
                answer = QMessageBox.question(
                    self._window, "The data file has changed",
                    plain(f"{exc}.\n\nUse the data file as it is now?"),
                    Button.Yes | Button.Cancel, Button.Cancel)
                if answer != Button.Yes:
                    return None
                try:
                    project = relink_data(exc.project, exc.path, accept_changes=True)
                except LagwiseError as error:
                    self._refuse("Could not read the data file", error)
                    return None
                relinked = True
            except LagwiseError as exc:
                self._refuse("Could not open the project", exc)
                return None

    def _locate(self, exc: LinkedDataMissing) -> Project | None:
        """Ask for the moved data file; the project linked to the chosen file (checked next)."""
        answer = QMessageBox.question(
            self._window, "The data file is missing",
            plain(f"{exc}.\n\nLocate the data file now?"), Button.Yes | Button.Cancel, Button.Yes)
        if answer != Button.Yes:
            return None
        start = exc.expected.parent if exc.expected is not None else Path(self._folder())
        path, _ = QFileDialog.getOpenFileName(self._window, "Locate the data file", str(start),
                                              FILE_FILTER)
        if not path:
            return None
        data = exc.project.data
        return replace(exc.project, data=replace(data, link=Path(path).absolute(), table=None))

    def _load(self, project: Project, table, saved: bool,
              diaries: tuple[Diary, Diary] | None = None) -> None:
        try:
            self._session.load_project(project, table, saved=saved, diaries=diaries)
        except LagwiseError as exc:
            self._refuse("Could not open the project", exc)
            return
        self.discard_recoveries()
        if project.file is not None and project.file.is_file():
            self._remember(project.file)
        shown = "the stored results are shown" if project.result is not None else "no results yet"
        self._say(f"Opened {self._session.name}: {shown}.")
        self.opened.emit()

    # ----- Save, Save As ----------------------------------------------------------------
    def save(self) -> bool:
        """File > Save (Save As for an untitled document); False when nothing was saved."""
        file = self._session.file
        return self.save_as() if file is None else self.save_to(file)

    def save_as(self) -> bool:
        """File > Save As: choose a file name, then save."""
        suggestion = Path(self._folder()) / f"{self._session.name}{SUFFIX}"
        path, _ = QFileDialog.getSaveFileName(self._window, "Save the project as",
                                              str(suggestion), PROJECT_FILTER)
        if not path:
            return False
        if not path.lower().endswith(SUFFIX):
            path += SUFFIX
        return self.save_to(Path(path))

    def save_to(self, path: Path) -> bool:
        """Write the document to `path` (atomically); a problem becomes a dialog."""
        if self._session.diary is None:
            QMessageBox.information(self._window, "Nothing to save",
                                    "Import a diary first (File ▸ Import data…).")
            return False
        try:
            saved = save_project(self._session.to_project(), path)
        except ProjectError as exc:
            self._refuse("Could not save the project", exc)
            return False
        self._session.mark_saved(saved.file, saved.created)
        self.discard_recoveries()
        self._remember(saved.file)
        self._say(f"Saved {saved.file}.")
        return True

    # ----- autosave and recovery --------------------------------------------------------
    def autosave(self) -> Path | None:
        """Write the document to its recovery file when it has unsaved changes."""
        if not self._session.is_modified() or self._session.diary is None:
            return None
        try:
            path = write_recovery(self._session.to_project())
        except ProjectError as exc:
            self._say(f"Autosave failed: {exc}")
            return None
        self._recoveries.add(path)
        return path

    def discard_recoveries(self) -> None:
        """Remove this document's autosaves (after a save, on New/Open, on a normal close)."""
        for path in list(self._recoveries):
            try:
                discard_recovery(path)
            except ProjectError:
                continue
            self._recoveries.discard(path)

    def offer_recovery(self) -> bool:
        """At start-up: offer each autosave left by a crash, newest first; restore the first
        one accepted (it stays unsaved), delete the declined ones. True when one was restored."""
        for recovery in find_recoveries():
            if self._ask_restore(recovery):
                try:
                    table = project_table(recovery.project)
                except LagwiseError as exc:
                    self._refuse("Could not restore the autosave", exc)
                    continue
                self._load(recovery.project, table, saved=False)
                self._recoveries.add(recovery.path)  # removed after the next save or close
                return True
            try:
                discard_recovery(recovery.path)
            except ProjectError as exc:
                self._refuse("Could not delete the autosave", exc)
        return False

    def _ask_restore(self, recovery: Recovery) -> bool:
        name = recovery.recovery_of.name if recovery.recovery_of is not None else "an untitled project"
        answer = QMessageBox.question(
            self._window, "Restore unsaved work?",
            plain(f"Lagwise was not closed normally. An autosaved copy of {name} from "
                  f"{recovery.modified.replace('T', ' ').replace('Z', ' UTC')} holds changes "
                  "that were not saved.\n\nRestore it? (No deletes the autosaved copy.)"),
            Button.Yes | Button.No, Button.Yes)
        return answer == Button.Yes

    # ----- recent files -----------------------------------------------------------------
    def recent(self) -> list[Path]:
        """Recently opened or saved projects, newest first (at most MAX_RECENT)."""
        value = QSettings().value(SETTINGS_RECENT, [])
        if isinstance(value, str):
            value = [value]
        return [Path(v) for v in (value or []) if isinstance(v, str) and v][:MAX_RECENT]

    def open_recent(self, path: Path) -> bool:
        """Open a recent project; a file that no longer exists is removed from the list."""
        if not Path(path).is_file():
            self._forget_recent(path)
            QMessageBox.information(self._window, "Project not found",
                                    plain(f"{path} no longer exists (moved, renamed or deleted); "
                                          "it was removed from the recent projects."))
            return False
        return self.open(path)

    def prune_recent(self) -> list[Path]:
        """Remove missing files from the list; returns the removed ones."""
        paths = self.recent()
        gone = [p for p in paths if not p.is_file()]
        if gone:
            self._store_recent([p for p in paths if p.is_file()])
        return gone

    def _remember(self, path: Path) -> None:
        path = Path(path).absolute()
        QSettings().setValue(SETTINGS_FOLDER, str(path.parent))
        self._store_recent([path] + [p for p in self.recent() if p != path])

    def _forget_recent(self, path: Path) -> None:
        path = Path(path).absolute()
        self._store_recent([p for p in self.recent() if p != path])

    def _store_recent(self, paths: list[Path]) -> None:
        QSettings().setValue(SETTINGS_RECENT, [str(p) for p in paths[:MAX_RECENT]])
        self.recentChanged.emit()

    # ----- helpers ----------------------------------------------------------------------
    def _folder(self) -> str:
        if self._session.file is not None:
            return str(self._session.file.parent)
        return str(QSettings().value(SETTINGS_FOLDER, "") or "")

    def _say(self, message: str) -> None:
        status = getattr(self._window, "statusBar", None)
        if status is not None:
            status().showMessage(message, 10000)

    def _refuse(self, title: str, exc: Exception) -> None:
        QMessageBox.warning(self._window, title, plain(str(exc)))
