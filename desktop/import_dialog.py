"""The import dialog: a data file becomes a diary, column by column.

Every column gets a role (item, day, prompt number, timestamp, person, ignore), guessed from
its name and contents and changeable by the user. The preview below updates as roles change:
how many occasions, days, answered prompts and lag windows the diary would have, the data
layer's notes, or its error message. Nothing reaches the project until the user accepts.

A person column makes the file a study of many people (models.study): every person's rows
become a diary of their own; the preview counts the people and their prompts, describes the
first person's diary, and guesses the answer scales and far-out values from everyone's answers.

Each item's answer scale (floor and ceiling are counted at its ends) is shown guessed from
the answers (models.scales) and can be typed over as LOW-HIGH. Answers far outside the rest
of an item (models.outliers, e.g. -99 beside answers from 0 to 100) are listed in the
preview with one button that adds them to the missing-value codes.
"""

from __future__ import annotations

import re
from html import escape
from dataclasses import replace
from pathlib import Path

import numpy as np
from PySide6.QtCore import QAbstractTableModel, QModelIndex, Qt, Signal
from PySide6.QtWidgets import (
    QComboBox, QDialog, QDialogButtonBox, QFileDialog, QFormLayout, QGroupBox, QHBoxLayout,
    QHeaderView, QLabel, QLineEdit, QPushButton, QSpinBox, QSplitter, QTableView, QTableWidget,
    QTableWidgetItem, QVBoxLayout, QWidget,
)

from lagwise.desktop import style
from lagwise.desktop.session import ImportSettings
from lagwise.models.diary import Diary, TimeSettings
from lagwise.models.errors import DataError, LagwiseError
from lagwise.models.outliers import FarValue, far_values
from lagwise.models.study import Study, StudyChoice, person_rows, study_from_frame
from lagwise.models.readers import SUPPORTED_SUFFIXES, looks_like_dates, numeric_cells, read_table
from lagwise.models.scales import Scale, guess_scale, parse_scale, scale_text
from lagwise.models.summary import diary_summary

ROLES: tuple[str, ...] = ("item", "day", "prompt number", "timestamp", "person", "ignore")
SINGLE_ROLES = ("day", "prompt number", "timestamp", "person")  # at most one column each
FILE_FILTER = ("Diary files (" + " ".join(f"*{s}" for s in SUPPORTED_SUFFIXES) + ");;"
               "All files (*)")
PREVIEW_ROWS = 8
# The date format choice: (shown, strftime format or None for "recognise from the data").
DATE_FORMATS: tuple[tuple[str, str | None], ...] = (
    ("recognise from the data", None),
    ("day/month/year  31/12/2026 18:30", "%d/%m/%Y %H:%M"),
    ("month/day/year  12/31/2026 18:30", "%m/%d/%Y %H:%M"),
    ("day.month.year  31.12.2026 18:30", "%d.%m.%Y %H:%M"),
    ("day-month-year  31-12-2026 18:30", "%d-%m-%Y %H:%M"),
    ("day/month/year (date only)", "%d/%m/%Y"),
    ("month/day/year (date only)", "%m/%d/%Y"),
    ("day.month.year (date only)", "%d.%m.%Y"),
)

TIME_WORDS = frozenset({"time", "timestamp", "datetime", "clock", "moment"})
DAY_WORDS = frozenset({"day", "date", "days", "dag", "datum"})
PROMPT_WORDS = frozenset({"prompt", "beep", "signal", "occasion", "prompts", "beeps"})
PERSON_ROWS = 5   # an identifier column with at least this many rows per value names people
ID_WORDS = frozenset({"id", "pid", "participant", "subject", "person", "case"})


def name_words(name: str) -> set[str]:
    """Lower-case words of a column name: 'beepTime', 'beep_time' -> {'beep', 'time'}."""
    spaced = re.sub(r"([a-z])([A-Z])", r"\1 \2", name)
    return {w for w in re.split(r"[^A-Za-z]+", spaced.lower()) if w}


def guess_role(name: str, column) -> str:
    """A sensible first role for a column from its name and contents.

    Names with time/timestamp/datetime -> timestamp; day/date -> day; prompt/beep/signal ->
    prompt number; identifiers -> person when they take at most one value per PERSON_ROWS rows
    (and at least two values), else ignore; other columns holding numbers -> item; text ->
    ignore.
    """
    words = name_words(name)
    if words & TIME_WORDS:
        return "timestamp"
    if words & DAY_WORDS:
        return "day"
    if words & PROMPT_WORDS:
        return "prompt number"
    if words and words <= ID_WORDS | {"nr", "no", "number"}:
        people = column.dropna().nunique()
        return "person" if 2 <= people and people * PERSON_ROWS <= len(column) else "ignore"
    values, bad = numeric_cells(column)
    filled = bad | ~np.isnan(values)
    if filled.any() and (~bad & filled).sum() > 0.5 * filled.sum():
        return "item"
    if looks_like_dates(column) and filled.any():
        return "timestamp"
    return "ignore"


def counted(n: int, noun: str, bold: bool = False) -> str:
    """'1 day', '3 days' (the number in bold for rich text)."""
    number = f"<b>{n}</b>" if bold else str(n)
    return f"{number} {noun}{'' if n == 1 else 's'}"


def time_settings(roles: dict[str, str], days_independent: bool = True,
                  max_gap_minutes: float | None = None,
                  date_format: str | None = None) -> TimeSettings:
    """Time settings that follow from the roles: day + prompt -> grid, timestamp -> by time."""
    pick = {role: name for name, role in roles.items() if role in SINGLE_ROLES}
    day, prompt, stamp = pick.get("day"), pick.get("prompt number"), pick.get("timestamp")
    if day or prompt:
        if stamp and not (day and prompt):
            return TimeSettings(mode="timestamp", time=stamp, days_independent=days_independent,
                                max_gap_minutes=max_gap_minutes, date_format=date_format)
        return TimeSettings(mode="grid", day=day, prompt=prompt, time=stamp,
                            days_independent=days_independent, date_format=date_format)
    if stamp:
        return TimeSettings(mode="timestamp", time=stamp, days_independent=days_independent,
                            max_gap_minutes=max_gap_minutes, date_format=date_format)
    return TimeSettings(mode="order", days_independent=days_independent)


class _FrameModel(QAbstractTableModel):
    """The first rows of the file as the user typed them."""

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self._columns: list[str] = []
        self._rows: list[list[str]] = []
        self._index: list[str] = []

    def set_frame(self, frame) -> None:
        self.beginResetModel()
        if frame is None:
            self._columns, self._rows, self._index = [], [], []
        else:
            head = frame.head(PREVIEW_ROWS)
            self._columns = [str(c) for c in head.columns]
            self._rows = [[_show(v) for v in row] for row in head.itertuples(index=False)]
            self._index = [str(i) for i in head.index]
        self.endResetModel()

    def rowCount(self, parent=QModelIndex()) -> int:
        return 0 if parent.isValid() else len(self._rows)

    def columnCount(self, parent=QModelIndex()) -> int:
        return 0 if parent.isValid() else len(self._columns)

    def data(self, index, role=Qt.ItemDataRole.DisplayRole):
        if role == Qt.ItemDataRole.DisplayRole and index.isValid():
            return self._rows[index.row()][index.column()]
        return None

    def headerData(self, section, orientation, role=Qt.ItemDataRole.DisplayRole):
        if role != Qt.ItemDataRole.DisplayRole:
            return None
        if orientation == Qt.Orientation.Horizontal:
            return self._columns[section]
        return self._index[section]


def _show(value) -> str:
    """A cell as text: empty for no value, 48 rather than 48.0."""
    if value is None:
        return ""
    if isinstance(value, float):
        return "" if value != value else f"{value:g}"
    return str(value)


class ImportDialog(QDialog):
    """Choose a file, give every column a role, check the preview, accept."""

    previewChanged = Signal()

    def __init__(self, parent: QWidget | None = None, path: str | Path | None = None,
                 days_independent: bool = True) -> None:
        super().__init__(parent)
        self.setWindowTitle("Import a diary")
        self.setObjectName("importDialog")
        self.resize(1000, 640)
        self._frame = None
        self._path = ""
        self._diary: Diary | None = None
        self._study: Study | None = None
        self._settings: ImportSettings | None = None
        self._days_independent = days_independent
        self._boxes: dict[str, QComboBox] = {}
        self._stated: dict[str, Scale] = {}  # scales the user typed, by item
        self._far: tuple[FarValue, ...] = ()
        self.start_folder = ""  # where "Choose file…" starts
        self._build()
        if path is not None:
            self.open_path(path)

    # ----- building ------------------------------------------------------------------
    def _build(self) -> None:
        layout = QVBoxLayout(self)
        top = QHBoxLayout()
        self.path_label = QLabel("No file chosen.")
        self.path_label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        choose = QPushButton("&Choose file…")
        choose.clicked.connect(self.choose_file)
        top.addWidget(self.path_label, 1)
        top.addWidget(choose)
        layout.addLayout(top)

        splitter = QSplitter(Qt.Orientation.Horizontal)
        left = QGroupBox("Columns and their roles")
        left_layout = QVBoxLayout(left)
        self.roles_table = QTableWidget(0, 3)
        self.roles_table.setHorizontalHeaderLabels(["Column", "First values", "Role"])
        self.roles_table.verticalHeader().setVisible(False)
        header = self.roles_table.horizontalHeader()
        header.setSectionResizeMode(0, QHeaderView.ResizeMode.ResizeToContents)
        header.setSectionResizeMode(1, QHeaderView.ResizeMode.Stretch)
        header.setSectionResizeMode(2, QHeaderView.ResizeMode.ResizeToContents)
        self.roles_table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        left_layout.addWidget(self.roles_table, 3)
        left_layout.addWidget(self._build_scales(), 2)
        hint = QLabel("Item: an answer to analyse. Day and prompt number place answers on a "
                      "daily grid; a timestamp places them by clock time.")
        hint.setWordWrap(True)
        hint.setStyleSheet(f"color: {style.MUTED};")
        left_layout.addWidget(hint)
        splitter.addWidget(left)

        right = QWidget()
        right_layout = QVBoxLayout(right)
        right_layout.setContentsMargins(0, 0, 0, 0)
        options = QGroupBox("Reading")
        form = QFormLayout(options)
        self.missing_edit = QLineEdit()
        self.missing_edit.setPlaceholderText("for example -99, 999, refused")
        self.missing_edit.setToolTip("Values that mean 'no answer', separated by commas.")
        self.missing_edit.editingFinished.connect(self.update_preview)
        form.addRow("&Missing-value codes:", self.missing_edit)
        self.per_day_spin = QSpinBox()
        self.per_day_spin.setRange(0, 100)
        self.per_day_spin.setSpecialValueText("as in the file")
        self.per_day_spin.setToolTip("The number of scheduled prompts a day (grid diaries). "
                                     "'As in the file' uses the highest prompt number found.")
        self.per_day_spin.valueChanged.connect(self.update_preview)
        form.addRow("&Prompts per day:", self.per_day_spin)
        self.gap_spin = QSpinBox()
        self.gap_spin.setRange(0, 24 * 60)
        self.gap_spin.setSuffix(" min")
        self.gap_spin.setSpecialValueText("no limit")
        self.gap_spin.setToolTip("Diaries placed by timestamp: a pause longer than this starts "
                                 "a new segment (no lag window spans it).")
        self.gap_spin.valueChanged.connect(self.update_preview)
        form.addRow("Longest &gap in a segment:", self.gap_spin)
        self.date_format_box = QComboBox()
        for shown, fmt in DATE_FORMATS:
            self.date_format_box.addItem(shown, fmt)
        self.date_format_box.setToolTip("How the dates of the day or timestamp column are "
                                        "written. Needed when no day is above 12, so the day "
                                        "and the month cannot be told apart.")
        self.date_format_box.currentIndexChanged.connect(self.update_preview)
        form.addRow("&Date format:", self.date_format_box)
        right_layout.addWidget(options)

        preview = QGroupBox("Preview of the diary")
        preview_layout = QVBoxLayout(preview)
        self.summary_label = QLabel("—")
        self.summary_label.setObjectName("importSummary")
        self.summary_label.setWordWrap(True)
        preview_layout.addWidget(self.summary_label)
        self.notes_label = QLabel("")
        self.notes_label.setWordWrap(True)
        self.notes_label.setStyleSheet(f"color: {style.NOTE};")
        preview_layout.addWidget(self.notes_label)
        preview_layout.addLayout(self._build_far_values())
        self.error_label = QLabel("")
        self.error_label.setObjectName("importError")
        self.error_label.setWordWrap(True)
        self.error_label.setTextFormat(Qt.TextFormat.PlainText)  # it may quote column names
        self.error_label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.error_label.setStyleSheet(f"color: {style.WARNING}; font-weight: bold;")
        preview_layout.addWidget(self.error_label)
        self.rows_view = QTableView()
        self.rows_model = _FrameModel(self)
        self.rows_view.setModel(self.rows_model)
        self.rows_view.horizontalHeader().setSectionResizeMode(
            QHeaderView.ResizeMode.ResizeToContents)
        preview_layout.addWidget(QLabel("First rows of the file:"))
        preview_layout.addWidget(self.rows_view, 1)
        right_layout.addWidget(preview, 1)
        splitter.addWidget(right)
        splitter.setSizes([460, 540])
        layout.addWidget(splitter, 1)

        self.buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok
                                        | QDialogButtonBox.StandardButton.Cancel)
        self.buttons.button(QDialogButtonBox.StandardButton.Ok).setText("&Import")
        self.buttons.accepted.connect(self.accept)
        self.buttons.rejected.connect(self.reject)
        layout.addWidget(self.buttons)
        self._set_ok(False)

    # ----- public --------------------------------------------------------------------
    def choose_file(self) -> None:
        folder = str(Path(self._path).parent) if self._path else self.start_folder
        path, _ = QFileDialog.getOpenFileName(self, "Open a diary file", folder, FILE_FILTER)
        if path:
            self.open_path(path)

    def open_path(self, path: str | Path) -> None:
        """Read the file and guess every column's role; a bad file shows its message here."""
        self._path = str(path)
        self.path_label.setText(self._path)
        try:
            frame = read_table(path)
        except LagwiseError as exc:
            self._frame = None
            self._fill_roles({})
            self.rows_model.set_frame(None)
            self._show_error(str(exc))
            return
        self._frame = frame
        self.rows_model.set_frame(frame)
        roles: dict[str, str] = {}
        for name in frame.columns:
            role = guess_role(str(name), frame[name])
            if role in SINGLE_ROLES and role in roles.values():
                role = "ignore"
            roles[str(name)] = role
        self._fill_roles(roles)
        self.update_preview()

    def role_box(self, column: str) -> QComboBox:
        """The role chooser of one column."""
        return self._boxes[column]

    def roles(self) -> dict[str, str]:
        return {name: box.currentText() for name, box in self._boxes.items()}

    def set_role(self, column: str, role: str) -> None:
        self._boxes[column].setCurrentText(role)

    def date_format(self) -> str | None:
        """The chosen strftime date format (None: recognised from the data)."""
        return self.date_format_box.currentData()

    def set_date_format(self, fmt: str | None) -> None:
        self.date_format_box.setCurrentIndex(max(0, self.date_format_box.findData(fmt)))

    def missing_codes(self) -> tuple[str, ...]:
        return tuple(c.strip() for c in self.missing_edit.text().split(",") if c.strip())

    def diary(self) -> Diary | None:
        """The diary of the current roles (None while they do not make one)."""
        return self._diary

    def frame(self):
        return self._frame

    def person_column(self) -> str | None:
        """The column with the role "person" (None: the file is one person's)."""
        return next((n for n, role in self.roles().items() if role == "person"), None)

    def study(self) -> Study | None:
        """Every person's diary under the current roles (None: one person, or no diary)."""
        return self._study

    def study_choice(self) -> StudyChoice | None:
        """The person column and the person whose diary `diary` is (None: one person)."""
        if self._study is None or self._diary is None:
            return None
        first = next(p for p in self._study.people if p.diary is self._diary)
        return StudyChoice(self._study.person_column, first.person)

    def diary_rows(self):
        """The rows `diary` is made from: the whole table, or the shown person's rows."""
        choice = self.study_choice()
        if choice is None:
            return self._frame
        return person_rows(self._frame, choice.person_column, choice.person, self._path)

    def settings(self) -> ImportSettings | None:
        return self._settings

    # ----- preview -------------------------------------------------------------------
    def update_preview(self) -> None:
        """Rebuild the diary from the current roles through the data layer and describe it."""
        self._diary, self._settings, self._study = None, None, None
        if self._frame is None:
            self._set_ok(False)
            return
        roles = self.roles()
        items = tuple(name for name, role in roles.items() if role == "item")
        gap = self.gap_spin.value() or None
        time = time_settings(roles, self._days_independent, float(gap) if gap else None,
                             self.date_format())
        per_day = self.per_day_spin.value() or None
        codes = self.missing_codes()
        if len(items) < 2:
            self._show_error("Choose at least two item columns (role 'item').")
            return
        try:
            settings = ImportSettings(path=self._path, items=items, time=time,
                                      missing_codes=codes, prompts_per_day=per_day)
            study, diary = self._read(settings)
        except LagwiseError as exc:
            self._show_error(str(exc))
            return
        self._diary, self._study = diary, study
        answers = diary.values if study is None else np.vstack(
            [p.diary.values for p in study.people if p.diary is not None])   # every person's
        self._settings = replace(settings, scales=tuple(self._show_scales(diary.items,
                                                                          answers).items()))
        self._show_far_values(diary.items, answers)
        summary = diary_summary(diary)
        occasions, answered = summary["occasions"], summary["answered"]
        windows = summary["windows"]["1"] + summary["partial_windows"]["1"]
        mode = {"grid": "a grid of days and prompt numbers", "timestamp": "their timestamps",
                "order": "file order (no day or time column)"}[time.mode]
        self.summary_label.setText(
            _people_line(study, diary) +
            f"{counted(diary.n_items, 'item', True)} · {counted(occasions, 'occasion', True)} · "
            f"{counted(summary['days'], 'day', True)} · "
            f"{counted(answered, 'prompt', True)} answered ({occasions - answered} missed) · "
            f"{counted(windows, 'lag window', True)} of two consecutive prompts "
            f"({summary['windows']['1']} complete)<br>Prompts are placed by {mode}.")
        self.notes_label.setText(style.plain("\n".join(f"Note: {w}" for w in summary["warnings"])))
        self.error_label.setText("")
        self._set_ok(True)
        self.previewChanged.emit()

    def _read(self, settings: ImportSettings) -> tuple[Study | None, Diary]:
        """The study (with a person column) and the diary the preview describes: the file's,
        or the first person's whose rows make one (DataError when nobody's do)."""
        person = self.person_column()
        if person is None:
            return None, settings.recipe.diary(self._frame, source=self._path)
        study = study_from_frame(self._frame, settings.recipe, person, source=self._path)
        first = next((p for p in study.people if p.diary is not None), None)
        if first is None:
            raise DataError(f"no person's rows make a diary ({study.people[0].person}: "
                            f"{study.people[0].problem})")
        return study, first.diary

    # ----- answer scales and far-out values ---------------------------------------------
    def _build_scales(self) -> QGroupBox:
        box = QGroupBox("Answer scales")
        layout = QVBoxLayout(box)
        self.scales_table = QTableWidget(0, 3)
        self.scales_table.setObjectName("scalesTable")
        self.scales_table.setHorizontalHeaderLabels(["Item", "Answers", "Scale"])
        self.scales_table.verticalHeader().setVisible(False)
        self.scales_table.horizontalHeader().setSectionResizeMode(
            QHeaderView.ResizeMode.Stretch)
        self.scales_table.setToolTip(
            "The lowest and highest possible answer of each item (floor and ceiling effects "
            "are counted there). Guessed as the smallest usual scale holding the answers "
            "(1-5, 0-4, 1-7, 0-6, 0-10, 0-100), else the lowest and highest answer; type "
            "over it as LOW-HIGH.")
        self.scales_table.itemChanged.connect(self._scale_edited)
        layout.addWidget(self.scales_table)
        return box

    def _build_far_values(self) -> QVBoxLayout:
        row = QVBoxLayout()
        self.far_label = QLabel()
        self.far_label.setObjectName("farValues")
        self.far_label.setWordWrap(True)
        self.far_label.setTextFormat(Qt.TextFormat.PlainText)  # it quotes item names
        self.far_label.setStyleSheet(f"color: {style.WARNING};")
        self.far_button = QPushButton()
        self.far_button.setObjectName("farValuesMissing")
        self.far_button.clicked.connect(self.treat_far_values_as_missing)
        row.addWidget(self.far_label)
        row.addWidget(self.far_button, 0, Qt.AlignmentFlag.AlignLeft)
        self._show_far_values()
        return row

    def scales(self) -> dict[str, Scale]:
        """Item -> (low, high): the scales the diary is imported with."""
        return dict(self._settings.scales) if self._settings is not None else {}

    def far_codes(self) -> tuple[str, ...]:
        """The far-out values of the preview, as missing-value codes."""
        return tuple(dict.fromkeys(far.code for far in self._far))

    def treat_far_values_as_missing(self) -> None:
        """Add the far-out values to the missing-value codes and rebuild the preview."""
        codes = self.missing_codes() + tuple(c for c in self.far_codes()
                                             if c not in self.missing_codes())
        self.missing_edit.setText(", ".join(codes))
        self.update_preview()

    def _show_scales(self, items: tuple[str, ...], answers: np.ndarray) -> dict[str, Scale]:
        """Fill the scale table (typed scales kept, the others guessed from `answers`, one
        column per item); return the scales."""
        scales = {}
        table = self.scales_table
        table.blockSignals(True)
        table.setRowCount(len(items))
        for row, name in enumerate(items):
            column = answers[:, row]
            seen = column[~np.isnan(column)]
            scale = self._stated.get(name) or guess_scale(column)
            table.setItem(row, 0, _cell(name))
            table.setItem(row, 1, _cell(f"{seen.min():g} to {seen.max():g}" if seen.size else "—"))
            entry = QTableWidgetItem("" if scale is None else scale_text(scale))
            entry.setToolTip("typed" if name in self._stated else "guessed from the answers")
            table.setItem(row, 2, entry)
            if scale is not None:
                scales[name] = scale
        table.blockSignals(False)
        return scales

    def _scale_edited(self, entry: QTableWidgetItem) -> None:
        if entry.column() != 2:
            return
        name = self.scales_table.item(entry.row(), 0).text()
        try:
            self._stated[name] = parse_scale(entry.text())
        except LagwiseError as exc:
            self._show_error(f"Item '{name}': {exc}")
            return
        self.update_preview()

    def _show_far_values(self, items: tuple[str, ...] = (),
                         answers: np.ndarray | None = None) -> None:
        self._far = () if answers is None else far_values(items, answers)
        lines = []
        for name in dict.fromkeys(far.item for far in self._far):
            found = ", ".join(f"{far.code} ({counted(far.count, 'time')})"
                              for far in self._far if far.item == name)
            lines.append(f"Item '{name}': {found} far outside its other answers.")
        if lines:
            lines.append("Values like these are often codes for 'no answer'.")
        self.far_label.setText("\n".join(lines))
        self.far_button.setText(f"Treat {', '.join(self.far_codes())} as missing")
        self.far_label.setVisible(bool(lines))
        self.far_button.setVisible(bool(lines))

    # ----- helpers -------------------------------------------------------------------
    def _fill_roles(self, roles: dict[str, str]) -> None:
        self._boxes.clear()
        self.roles_table.setRowCount(len(roles))
        for row, (name, role) in enumerate(roles.items()):
            self.roles_table.setItem(row, 0, _cell(name))
            self.roles_table.setItem(row, 1, _cell(self._examples(name)))
            box = QComboBox()
            box.addItems(ROLES)
            box.setCurrentText(role)
            box.setAccessibleName(f"Role of column {name}")
            box.currentTextChanged.connect(lambda text, name=name: self._role_changed(name, text))
            self.roles_table.setCellWidget(row, 2, box)
            self._boxes[name] = box

    def _role_changed(self, column: str, role: str) -> None:
        if role in SINGLE_ROLES:  # one day, prompt and timestamp column each
            for name, box in self._boxes.items():
                if name != column and box.currentText() == role:
                    box.blockSignals(True)
                    box.setCurrentText("ignore")
                    box.blockSignals(False)
        self.update_preview()

    def _examples(self, name: str) -> str:
        cells = [_show(v) for v in self._frame[name].head(4)]
        return ", ".join(c for c in cells if c)

    def _show_error(self, message: str) -> None:
        self._show_far_values()
        self.summary_label.setText("—")
        self.notes_label.setText("")
        self.error_label.setText(message)
        self._set_ok(False)
        self.previewChanged.emit()

    def _set_ok(self, enabled: bool) -> None:
        self.buttons.button(QDialogButtonBox.StandardButton.Ok).setEnabled(enabled)


def _cell(text: str) -> QTableWidgetItem:
    item = QTableWidgetItem(text)
    item.setFlags(Qt.ItemFlag.ItemIsEnabled | Qt.ItemFlag.ItemIsSelectable)
    return item


def _people_line(study: Study | None, shown: Diary) -> str:
    """'12 people, 180-260 prompts each (not a diary: P07) · P01's diary:' (rich text)."""
    if study is None:
        return ""
    counts = [p.diary.n_occasions for p in study.people if p.diary is not None]
    span = f"{min(counts)}" if min(counts) == max(counts) else f"{min(counts)}-{max(counts)}"
    refused = [p.person for p in study.people if p.diary is None]
    first = next(p.person for p in study.people if p.diary is shown)
    line = f"<b>{len(study)}</b> {'person' if len(study) == 1 else 'people'}, {span} prompts each"
    if refused:
        line += f" (rows not a diary: {escape(', '.join(refused))})"
    return f"{line}<br>{escape(first)}'s diary: "
