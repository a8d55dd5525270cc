"""The across-people view: the results of a batch folder (`lagwise batch --out DIR`).

Three tables, each exportable as CSV: for every lagged path the people whose 95% interval
lies above and below 0; the median and interquartile range of each inertia; and every person
with their status, share of prompts answered and the codes of their fit's warnings (or why
they were not fitted). A line above them says that these are person-specific models, not a
multilevel model. Every number comes from models.across, formatted by models.numbers.fmt.
The dialog stays open beside the window; clicking a person in the People tab announces them
(`personChosen`), and the window of a study opens that person's stored results.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (
    QDialog, QHBoxLayout, QHeaderView, QLabel, QTableWidget, QTableWidgetItem, QTabWidget,
    QVBoxLayout, QWidget,
)

from lagwise.desktop.export import export_menu, menu_button
from lagwise.models.across import NOT_MULTILEVEL, Across, across_people
from lagwise.models.batchfiles import read_batch
from lagwise.models.numbers import fmt
from lagwise.models.personfit import PersonOutcome


def _share(part: int, whole: int) -> str:
    return f"{part} of {whole}" + (f" ({fmt(100 * part / whole, 'int')}%)" if whole else "")


class AcrossDialog(QDialog):
    """The summaries across the people of one batch folder (raises DataError when the folder
    holds no finished batch)."""

    personChosen = Signal(str)   # a person clicked in the People tab

    def __init__(self, folder: str | Path, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.folder = Path(folder)
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
        self.people.setToolTip("Click a person to open their results in the window "
                               "(a project holding this study)")
        self.people.cellClicked.connect(
            lambda row, _column: self.personChosen.emit(self.outcomes[row].person))

    def _tab(self, title: str, name: str, rows: list[tuple[str, ...]],
             header: tuple[str, ...]) -> QTableWidget:
        table = QTableWidget(len(rows), len(header))
        table.setHorizontalHeaderLabels(header)
        table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        table.verticalHeader().setVisible(False)
        table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        table.horizontalHeader().setStretchLastSection(True)
        for r, row in enumerate(rows):
            for c, text in enumerate(row):
                table.setItem(r, c, QTableWidgetItem(text))
        page = QWidget()
        box = QVBoxLayout(page)
        top = QHBoxLayout()
        top.addStretch(1)
        button = menu_button("Export", "Save this table as CSV")
        button.setMenu(export_menu(button, table_model=table.model(), name=name))
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


def _people_rows(outcomes: tuple[PersonOutcome, ...]) -> list[tuple[str, ...]]:
    rows = []
    for o in outcomes:
        answered = "" if o.compliance is None else f"{fmt(100 * o.compliance, 'int')}%"
        said = ", ".join(dict.fromkeys(code for code, _ in o.warnings)) if o.fitted else o.reason
        rows.append((o.person, o.status, answered, said or ""))
    return rows
