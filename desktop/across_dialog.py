"""The across-people view: the results of a batch folder (`lagwise batch --out DIR`).

Four tables, each exportable as CSV: for every lagged path the people whose 95% interval
lies above and below 0; the median and interquartile range of each inertia; every person
with their status, share of prompts answered and the codes of their fit's warnings (or why
they were not fitted); every person's estimate of every free parameter with its interval
(also as one row per person). A strip plot shows every person's estimate of every lagged
path with its interval (the study report's picture, models.reporting.study). A line above them says that these are person-specific models, not a
multilevel model. Every number comes from models.across, formatted by models.numbers.fmt.
The dialog stays open beside the window; clicking a person in the People tab announces them
(`personChosen`), and the window of a study opens that person's stored results.
"""

from __future__ import annotations

import csv
import io
from pathlib import Path

from PySide6.QtCore import QByteArray, Qt, Signal
from PySide6.QtGui import QStandardItem, QStandardItemModel
from PySide6.QtSvgWidgets import QSvgWidget
from PySide6.QtWidgets import (
    QDialog, QHBoxLayout, QHeaderView, QLabel, QScrollArea, QTableWidget,
    QTableWidgetItem, QTabWidget, QVBoxLayout, QWidget,
)

from lagwise.desktop.export import ask_and_save, export_menu, menu_button
from lagwise.models.across import (CAUTION, NOT_MULTILEVEL, Across, across_people,
                                   estimates_wide_csv)
from lagwise.models.kinds import parameter_words
from lagwise.models.reporting.study import strip_figure
from lagwise.models.batchfiles import read_batch
from lagwise.models.numbers import fmt
from lagwise.models.personfit import PersonOutcome


def _is_number(text: str) -> bool:
    try:
        float(text.rstrip("%"))
    except ValueError:
        return False
    return True


def _share(part: int, whole: int) -> str:
    return f"{part} of {whole}" + (f" ({fmt(100 * part / whole, 'int')}%)" if whole else "")


class AcrossDialog(QDialog):
    """The summaries across the people of one batch folder (raises DataError when the folder
    holds no finished batch)."""

    personChosen = Signal(str)   # a person clicked in the People tab

    def __init__(self, folder: str | Path, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.folder = Path(folder)
        self.caution = CAUTION                     # every export repeats it
        self.outcomes = outcomes = read_batch(folder)
        across = across_people(outcomes)
        self.setWindowTitle(f"Across people: {Path(folder).name}")
        self.setObjectName("acrossDialog")
        self.resize(900, 560)
        layout = QVBoxLayout(self)
        self.note = QLabel(f"{len(across.fitted)} of {len(across.people)} people fitted. "
                           f"{NOT_MULTILEVEL}")
        self.note.setTextFormat(Qt.TextFormat.PlainText)
        self.note.setWordWrap(True)
        layout.addWidget(self.note)
        self.tabs = QTabWidget()
        layout.addWidget(self.tabs, 1)
        self.paths = self._tab("Lagged paths", "lagged-paths", _path_rows(across),
                               ("Path", "From", "To", "People", "Interval above 0",
                                "Interval below 0"))
        self.inertia = self._tab("Inertia", "inertia", _inertia_rows(across),
                                 ("State", "People", "Median", "25th percentile",
                                  "75th percentile", "Interquartile range"))
        self.people = self._tab("People", "people", _people_rows(outcomes),
                                ("Person", "Status", "Prompts answered", "Warnings or reason"))
        self.wide = _text_model([row for row in csv.reader(io.StringIO(estimates_wide_csv(across)))
                                 if not row[0].startswith("#")])    # the caution line
        self.estimates = self._tab(
            "Estimates", "estimates", _estimate_rows(across),
            ("Person", "Parameter", "Estimate", "SE", "95% low", "95% high", "Warnings"),
            more=("Save one row per person as CSV…",
                  lambda: ask_and_save(self, self.wide, "estimates-wide", "csv", self.caution)))
        self.strips = self._strip_tab(across)
        self.people.setToolTip("Click a person to open their results in the window "
                               "(a project holding this study)")
        self.people.cellClicked.connect(
            lambda row, _column: self.personChosen.emit(self.outcomes[row].person))

    def _strip_tab(self, across: Across) -> QSvgWidget | None:
        """Every person's estimate of every lagged path with its interval (the report's picture)."""
        figure = strip_figure(across)
        if figure is None:
            return None
        picture = QSvgWidget()
        picture.load(QByteArray(figure.markup.encode("utf-8")))
        picture.setFixedSize(picture.sizeHint())
        picture.setToolTip(figure.caption)
        caption = QLabel(figure.caption)
        caption.setTextFormat(Qt.TextFormat.PlainText)
        caption.setWordWrap(True)
        page = QWidget()
        box = QVBoxLayout(page)
        top = QHBoxLayout()
        top.addWidget(caption, 1)
        button = menu_button("Export", "Save this picture as PNG or SVG")
        button.setMenu(export_menu(button, picture=picture, name="lagged-paths-over-people",
                                   caution=self.caution))
        top.addWidget(button)
        box.addLayout(top)
        scroll = QScrollArea()
        scroll.setWidget(picture)
        scroll.setAlignment(Qt.AlignmentFlag.AlignHCenter | Qt.AlignmentFlag.AlignTop)
        box.addWidget(scroll, 1)
        self.tabs.addTab(page, "Strip plot")
        return picture

    def _tab(self, title: str, name: str, rows: list[tuple[str, ...]],
             header: tuple[str, ...], more: tuple[str, object] | None = None) -> QTableWidget:
        table = QTableWidget(len(rows), len(header))
        table.setHorizontalHeaderLabels(header)
        table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        table.verticalHeader().setVisible(False)
        table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        table.horizontalHeader().setStretchLastSection(True)
        for r, row in enumerate(rows):
            for c, text in enumerate(row):
                item = QTableWidgetItem(text)
                if _is_number(text):            # numbers right-aligned (common practice)
                    item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
                table.setItem(r, c, item)
        page = QWidget()
        box = QVBoxLayout(page)
        top = QHBoxLayout()
        top.addStretch(1)
        button = menu_button("Export", "Save this table as CSV")
        button.setMenu(export_menu(button, table_model=table.model(), name=name,
                                   caution=self.caution))
        if more is not None:                 # a further export of this tab
            button.menu().addAction(more[0]).triggered.connect(more[1])
        top.addWidget(button)
        box.addLayout(top)
        box.addWidget(table, 1)
        self.tabs.addTab(page, title)
        return table


def _path_rows(across: Across) -> list[tuple[str, ...]]:
    return [(p.kind.replace("_", " "), p.from_, p.to, str(p.people),
             _share(p.positive, p.people), _share(p.negative, p.people)) for p in across.paths]


def _inertia_rows(across: Across) -> list[tuple[str, ...]]:
    return [(s.state, str(s.people), fmt(s.median), fmt(s.q1), fmt(s.q3), fmt(s.q3 - s.q1))
            for s in across.inertias]


def _estimate_rows(across: Across) -> list[tuple[str, ...]]:
    """Every fitted person's every free parameter (the long table of estimates.csv)."""
    out = []
    for row in across.rows:
        p = row.parameter
        low, high = row.interval or (None, None)
        out.append((row.person, parameter_words(p.kind, p.from_, p.to, p.lag), fmt(p.estimate),
                    fmt(p.se), fmt(low), fmt(high), ", ".join(row.flags)))
    return out


def _text_model(rows: list[list[str]]) -> QStandardItemModel:
    """A table of texts (header row first) for the CSV export."""
    model = QStandardItemModel(max(len(rows) - 1, 0), len(rows[0]) if rows else 0)
    if rows:
        model.setHorizontalHeaderLabels(rows[0])
    for r, row in enumerate(rows[1:]):
        for c, text in enumerate(row):
            model.setItem(r, c, QStandardItem(text))
    return model


def _people_rows(outcomes: tuple[PersonOutcome, ...]) -> list[tuple[str, ...]]:
    rows = []
    for o in outcomes:
        answered = "" if o.compliance is None else f"{fmt(100 * o.compliance, 'int')}%"
        said = ", ".join(dict.fromkeys(code for code, _ in o.warnings)) if o.fitted else o.reason
        rows.append((o.person, o.status, answered, said or ""))
    return rows
