"""Small building blocks shared by the results tabs: panel base, titles, tables, export menu,
and "Copy table" (every results table: its context menu, Ctrl+Shift+C, and the Export menu)."""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import QAbstractItemModel, QMimeData, Qt
from PySide6.QtGui import QAction, QGuiApplication, QKeySequence
from PySide6.QtWidgets import (QAbstractItemView, QFileDialog, QHBoxLayout, QHeaderView, QLabel,
                               QMessageBox, QSizePolicy, QTableView, QVBoxLayout, QWidget)

from lagwise.desktop.export import Picture, menu_button, save_picture, save_table_csv, table_rows
from lagwise.desktop.style import plain
from lagwise.models.reporting.journal import shown_table, table_html, tsv
from lagwise.models.results import FitResult

_FILTERS = {"png": "PNG picture (*.png)", "svg": "SVG picture (*.svg)", "csv": "CSV table (*.csv)"}
COPY_SHORTCUT = "Ctrl+Shift+C"


class ResultsPanel(QWidget):
    """One results tab: a title row with an Export button above the panel's content.

    Subclasses fill `self.body`, implement `show_result`, and list what can be saved in
    `pictures()` and `tables()` (label -> picture or table model). `caution` (set by the
    ResultsView) is written as the last line of every table saved as CSV.
    """

    name = "results"
    caution = ""

    def __init__(self, title: str, parent: QWidget | None = None):
        super().__init__(parent)
        outer = QVBoxLayout(self)
        outer.setContentsMargins(12, 10, 12, 12)
        outer.setSpacing(8)
        head = QHBoxLayout()
        self.title = QLabel(title)
        self.title.setObjectName("resultsTitle")
        font = self.title.font()
        font.setPointSizeF(font.pointSizeF() * 1.25)
        font.setBold(True)
        self.title.setFont(font)
        head.addWidget(self.title)
        head.addStretch(1)
        self.head = head
        self.export_button = menu_button(tip="Save the pictures (PNG, SVG) and numbers (CSV) of this tab")
        self.export_button.menu().aboutToShow.connect(self._fill_export_menu)
        head.addWidget(self.export_button)
        outer.addLayout(head)
        self.body = QVBoxLayout()
        self.body.setSpacing(8)
        outer.addLayout(self.body, 1)

    def show_result(self, result: FitResult) -> None:  # pragma: no cover - abstract
        raise NotImplementedError

    def pictures(self) -> dict[str, Picture]:
        return {}

    def tables(self) -> dict[str, QAbstractItemModel]:
        return {}

    # ----- export -----------------------------------------------------------------------
    def _fill_export_menu(self) -> None:
        menu = self.export_button.menu()
        menu.clear()
        for label, picture in self.pictures().items():
            for kind in ("png", "svg"):
                action = QAction(f"Save {label} as {kind.upper()}…", menu)
                action.triggered.connect(lambda _=False, p=picture, k=kind, n=label: self._ask(p, k, n))
                menu.addAction(action)
        if self.pictures() and self.tables():
            menu.addSeparator()
        for label, model in self.tables().items():
            action = QAction(f"Save {label} as CSV…", menu)
            action.triggered.connect(lambda _=False, m=model, n=label: self._ask(m, "csv", n))
            menu.addAction(action)
        for label, model in self.tables().items():
            action = QAction(f"Copy {label}", menu)
            action.triggered.connect(lambda _=False, m=model: copy_table(m))
            menu.addAction(action)

    def _ask(self, target, kind: str, label: str) -> None:
        suggested = f"{self.name}-{label}".replace(" ", "-").lower() + "." + kind
        path, _ = QFileDialog.getSaveFileName(self, "Save as", suggested, _FILTERS[kind])
        if not path:
            return
        if Path(path).suffix.lower() != "." + kind:
            path += "." + kind
        try:
            save(target, path, self.caution)
        except OSError as exc:
            QMessageBox.warning(self, "Could not save", plain(str(exc)))


def save(target, path: str | Path, caution: str = "") -> Path:
    """Save a picture (PNG or SVG by suffix, `caution` as its caption) or a table model (CSV,
    `caution` its last line)."""
    if Path(path).suffix.lower() == ".csv":
        return save_table_csv(target, path, caution)
    return save_picture(target, path, caution)


def table_mime(model: QAbstractItemModel) -> QMimeData:
    """The table as shown (header first) as tab-separated text and as an HTML table, for
    pasting into a spreadsheet or a word processor."""
    rows = table_rows(model)
    mime = QMimeData()
    mime.setText(tsv(rows))
    mime.setHtml(table_html(shown_table(rows)))
    return mime


def copy_table(model: QAbstractItemModel) -> None:
    """Put the table on the clipboard (`table_mime`)."""
    QGuiApplication.clipboard().setMimeData(table_mime(model))


def section_label(text: str) -> QLabel:
    label = QLabel(text)
    font = label.font()
    font.setBold(True)
    label.setFont(font)
    return label


def note_label(text: str = "") -> QLabel:
    """Wrapped, selectable small print in a muted colour."""
    label = QLabel(text)
    label.setWordWrap(True)
    label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
    label.setStyleSheet("color: #4a5358;")
    label.setSizePolicy(QSizePolicy.Policy.Preferred, QSizePolicy.Policy.Minimum)
    return label


def table_view(model: QAbstractItemModel, stretch_last: bool = False) -> QTableView:
    """A read-only, keyboard-navigable table with compact rows."""
    view = QTableView()
    view.setModel(model)
    view.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
    view.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
    view.setAlternatingRowColors(True)
    view.setWordWrap(False)
    view.verticalHeader().setVisible(False)
    view.verticalHeader().setDefaultSectionSize(view.fontMetrics().height() + 8)
    header = view.horizontalHeader()
    header.setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
    header.setStretchLastSection(stretch_last)
    header.setDefaultAlignment(Qt.AlignmentFlag.AlignCenter)
    copy = QAction("Copy table", view)
    copy.setShortcut(QKeySequence(COPY_SHORTCUT))
    copy.setShortcutContext(Qt.ShortcutContext.WidgetWithChildrenShortcut)
    copy.setToolTip("Copy the whole table as shown (tab-separated text and HTML)")
    copy.triggered.connect(lambda: copy_table(view.model()))
    view.addAction(copy)
    view.setContextMenuPolicy(Qt.ContextMenuPolicy.ActionsContextMenu)
    return view


def table_width(view: QTableView) -> int:
    """Width that shows every column of `view` without a horizontal scroll bar."""
    view.resizeColumnsToContents()
    columns = view.horizontalHeader().length()
    vertical = view.verticalHeader().width() if view.verticalHeader().isVisible() else 0
    return columns + vertical + 2 * view.frameWidth() + view.verticalScrollBar().sizeHint().width()


def fit_height(view: QTableView) -> None:
    """Fix a short table's height to show all its rows (no scroll bar)."""
    rows = view.verticalHeader().defaultSectionSize() * view.model().rowCount()
    header = view.horizontalHeader().sizeHint().height()
    view.setFixedHeight(rows + header + 2 * view.frameWidth() + 4)
