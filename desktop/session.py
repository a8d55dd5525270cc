"""The document the window edits: the diary, how it was imported, the model, the last result.

A `Session` holds immutable values only (Diary, ImportSettings, ModelSpec, FitOptions,
FitResult) and announces every change through Qt signals; views subscribe to it. Every
edit of the model goes through the undo stack as a command that swaps one immutable
snapshot for another, so undo and redo are exact and cheap. A running estimate gets a
`snapshot()` of the values, never the session itself.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

from PySide6.QtCore import QObject, Signal
from PySide6.QtGui import QUndoCommand, QUndoStack

from models.diary import Diary, TimeSettings
from models.errors import SpecError
from models.results import FitResult
from models.spec import FitOptions, ModelSpec
from models.timegrid import diary_from_frame


@dataclass(frozen=True)
class ImportSettings:
    """How the diary was made from its file: item columns, time settings, missing codes.

    prompts_per_day: the schedule of a grid diary (None: the highest prompt number seen).
    """

    path: str
    items: tuple[str, ...]
    time: TimeSettings
    missing_codes: tuple[str, ...] = ()
    prompts_per_day: int | None = None


@dataclass(frozen=True)
class Snapshot:
    """Frozen inputs of one estimate."""

    diary: Diary
    spec: ModelSpec
    options: FitOptions


EMPTY_SPEC = ModelSpec(states=())


class Session(QObject):
    """The editable document; see the module docstring."""

    dataChanged = Signal()      # diary or import settings replaced
    specChanged = Signal()      # model specification replaced
    optionsChanged = Signal()   # estimator settings replaced
    resultChanged = Signal()    # a new result (or none)

    def __init__(self, parent: QObject | None = None) -> None:
        super().__init__(parent)
        self.undo_stack = QUndoStack(self)
        self._frame = None
        self._diary: Diary | None = None
        self._import: ImportSettings | None = None
        self._spec: ModelSpec = EMPTY_SPEC
        self._options = FitOptions()
        self._result: FitResult | None = None
        self._result_inputs: Snapshot | None = None

    # ----- reading -------------------------------------------------------------------
    @property
    def diary(self) -> Diary | None:
        return self._diary

    @property
    def import_settings(self) -> ImportSettings | None:
        return self._import

    @property
    def spec(self) -> ModelSpec:
        return self._spec

    @property
    def options(self) -> FitOptions:
        return self._options

    @property
    def result(self) -> FitResult | None:
        return self._result

    @property
    def items(self) -> tuple[str, ...]:
        return () if self._diary is None else self._diary.items

    def snapshot(self) -> Snapshot | None:
        """The frozen inputs for an estimate (None while no diary is loaded)."""
        if self._diary is None:
            return None
        return Snapshot(self._diary, self._spec, self._options)

    def result_is_current(self) -> bool:
        """True when the shown result was estimated from the present diary, model and settings."""
        inputs = self._result_inputs
        return (self._result is not None and inputs is not None and inputs.diary is self._diary
                and inputs.spec == self._spec and inputs.options == self._options)

    def validation(self) -> tuple[list[str], str | None]:
        """Plain-word notes on the model and the one problem that blocks estimation, if any."""
        try:
            notes = self._spec.validate(self.items if self._diary is not None else None)
        except SpecError as exc:
            return [], str(exc)
        return notes, None

    # ----- replacing the whole document ----------------------------------------------
    def load_data(self, frame, diary: Diary, settings: ImportSettings,
                  spec: ModelSpec | None = None, options: FitOptions | None = None) -> None:
        """Start on a new diary: the model is reset (or set to `spec`) and undo history cleared."""
        self.undo_stack.clear()
        self._frame = frame
        self._diary = diary
        self._import = settings
        self._spec = spec if spec is not None else EMPTY_SPEC
        if options is not None:
            self._options = options
        self._result = None
        self._result_inputs = None
        self.dataChanged.emit()
        self.specChanged.emit()
        self.optionsChanged.emit()
        self.resultChanged.emit()

    def set_result(self, result: FitResult | None, inputs: Snapshot | None = None) -> None:
        """Show `result`, estimated from `inputs` (not an edit: it is not undoable)."""
        self._result = result
        self._result_inputs = inputs
        self.resultChanged.emit()

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
        diary = diary_from_frame(self._frame, settings.items, time,
                                 missing_codes=settings.missing_codes, source=settings.path,
                                 prompts_per_day=settings.prompts_per_day)
        self.undo_stack.push(_DataSwap(self, (self._import, self._diary), (settings, diary), text))

    # ----- used by the commands ------------------------------------------------------
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


class _DataSwap(QUndoCommand):
    """Swap the (import settings, diary) pair, e.g. when the night rule changes."""

    def __init__(self, session: Session, old: tuple, new: tuple, text: str) -> None:
        super().__init__(text)
        self._session, self._old, self._new = session, old, new

    def redo(self) -> None:
        self._session._set_data(*self._new)

    def undo(self) -> None:
        self._session._set_data(*self._old)
