"""User text is shown as written: names that look like markup are never rendered as markup.

Qt renders a label, tooltip or message box text as rich text when it looks like HTML
(Qt.mightBeRichText, AutoText), and pyqtgraph's titles, axis labels and legends are always
HTML. The window is loaded with the bundled demo diary (simulated, resources/demo) whose
item "tense" and state "tension" are renamed to markup, every page and results tab is
rendered, and every text a person can see (labels, buttons, tooltips, table headers and
tooltips, picture texts, dialogs) is read back as displayed: wherever the name appears, the
characters "<b>INJ</b>" must be there, never a bold INJ.
"""

from __future__ import annotations

import json
from dataclasses import replace

import pytest
from PySide6.QtCore import QAbstractListModel, QModelIndex, Qt
from PySide6.QtGui import QTextDocument
from PySide6.QtGui import Qt as QtGuiNamespace
from PySide6.QtWidgets import (QAbstractButton, QAbstractItemView, QGraphicsTextItem,
                               QGraphicsView, QLabel, QMessageBox, QTabWidget, QWidget)

from window_helpers import open_window, settle

from lagwise.desktop.app import DEMO_DIARY, DEMO_TRUTH
from lagwise.desktop.mainwindow import PAGES
from lagwise.desktop.session import ImportSettings
from lagwise.models.diary import TimeSettings
from lagwise.models.readers import read_table
from lagwise.models.spec import ModelSpec, State

MARK = "<b>INJ</b>"
ITEM = MARK + "<img src=x>"
STATE = MARK + " & <i>state</i>"
TIMEOUT_MS = 120_000
RICH_SOURCE = "source of a label that may read markup"


def displayed(text: str, text_format: Qt.TextFormat = Qt.TextFormat.AutoText) -> str:
    """What Qt shows for `text` in a place with `text_format` (AutoText: rich when
    Qt.mightBeRichText says so, as QLabel, tooltips and message boxes decide)."""
    rich = (text_format == Qt.TextFormat.RichText or
            (text_format == Qt.TextFormat.AutoText and QtGuiNamespace.mightBeRichText(text)))
    if not rich:
        return text
    document = QTextDocument()
    document.setHtml(text)
    return document.toPlainText()


def shown_texts(window: QWidget) -> list[tuple[str, str]]:
    """(where, displayed text) of every text a person can see in the window."""
    out = []
    for label in window.findChildren(QLabel):
        out.append((f"label {label.objectName()}", displayed(label.text(), label.textFormat())))
        if label.textFormat() != Qt.TextFormat.PlainText:
            out.append((RICH_SOURCE, label.text()))
    for button in window.findChildren(QAbstractButton):
        out.append(("button", button.text()))  # buttons never render markup
    for widget in window.findChildren(QWidget):
        if widget.toolTip():
            out.append((f"tooltip of {type(widget).__name__}", displayed(widget.toolTip())))
    for view in window.findChildren(QAbstractItemView):
        model = view.model()
        if model is None:
            continue
        rows = model.rowCount(QModelIndex())
        columns = 1 if isinstance(model, QAbstractListModel) else model.columnCount(QModelIndex())
        for orientation, count in ((Qt.Orientation.Horizontal, columns),
                                   (Qt.Orientation.Vertical, rows)):
            for i in range(count):
                for role in (Qt.ItemDataRole.DisplayRole, Qt.ItemDataRole.ToolTipRole):
                    value = model.headerData(i, orientation, role)
                    if isinstance(value, str):
                        out.append(("table header", value if role == Qt.ItemDataRole.DisplayRole
                                    else displayed(value)))
        for row in range(rows):
            for column in range(columns):
                value = model.data(model.index(row, column, QModelIndex()), Qt.ItemDataRole.ToolTipRole)
                if isinstance(value, str):
                    out.append(("cell tooltip", displayed(value)))
    for view in window.findChildren(QGraphicsView):
        for item in view.scene().items() if view.scene() is not None else ():
            if isinstance(item, QGraphicsTextItem):
                out.append((f"picture text in {type(view).__name__}", item.toPlainText()))
            if item.toolTip():
                out.append(("picture tooltip", displayed(item.toolTip())))
    return out


def assert_shown_as_written(texts: list[tuple[str, str]]) -> None:
    """The name shows as written; a label that may read markup holds it escaped."""
    bad = [(where, text) for where, text in texts if "INJ" in text and
           (MARK in text if where == RICH_SOURCE else MARK not in text)]
    assert bad == []


@pytest.fixture
def hostile_window(qtbot, lagwise_app):
    window = open_window(qtbot)
    frame = read_table(DEMO_DIARY).rename(columns={"tense": ITEM})
    time = TimeSettings(mode="grid", day="day", prompt="prompt")
    items = tuple(str(c) for c in frame.columns if c not in time.columns())
    settings = ImportSettings(path=str(DEMO_DIARY), items=items, time=time)
    diary = settings.recipe.diary(frame, source=str(DEMO_DIARY))
    spec = ModelSpec.from_json(json.loads(DEMO_TRUTH.read_text(encoding="utf-8"))["spec"])
    states = tuple(State(STATE if s.name == "tension" else s.name,
                         tuple(ITEM if it == "tense" else it for it in s.items))
                   for s in spec.states)
    window.session.load_data(frame, diary, settings, spec=replace(spec, states=states))
    settle(qtbot)
    return window


def _visit_everything(qtbot, window) -> list[tuple[str, str]]:
    """Every page, every tab on it, and in the screening every item's plots."""
    texts = []
    for index, page in enumerate(window.pages()):
        window.show_page(index)
        settle(qtbot, 20)
        texts += shown_texts(window)
        for tabs in page.findChildren(QTabWidget):
            for tab in range(tabs.count()):
                tabs.setCurrentIndex(tab)
                settle(qtbot, 20)
                texts += shown_texts(window)
    screening = window.pages()[PAGES.index("Data")].screening
    window.show_page(PAGES.index("Data"))
    window.pages()[PAGES.index("Data")].tabs.setCurrentWidget(
        window.pages()[PAGES.index("Data")].screening_scroll)
    settle(qtbot, 20)
    for row in range(screening.item_table.model().rowCount()):
        screening.item_table.setCurrentIndex(screening.item_table.model().index(row, 0))
        settle(qtbot, 20)
        texts += shown_texts(window)
    return texts


def test_markup_names_are_shown_as_written_on_every_page_and_tab(qtbot, hostile_window):
    window = hostile_window
    assert window.estimate()
    qtbot.waitUntil(lambda: not window.worker.busy and window.session.result is not None,
                    timeout=TIMEOUT_MS)
    settle(qtbot)
    assert window.run_lag2_check()
    qtbot.waitUntil(lambda: not window.worker.busy, timeout=TIMEOUT_MS)
    settle(qtbot)
    texts = _visit_everything(qtbot, window)
    assert_shown_as_written(texts)
    # the names are on screen in labels, tables and pictures (the walk saw them)
    kinds = {where.split(" ")[0] for where, text in texts if MARK in text and where != RICH_SOURCE}
    assert {"label", "picture", "table"} <= kinds
    assert any(ITEM in text for _, text in texts) and any(STATE in text for _, text in texts)


def test_error_dialogs_show_names_as_written(qtbot, hostile_window, monkeypatch):
    asked = []
    monkeypatch.setattr(QMessageBox, "warning",
                        lambda parent, title, text, *rest: asked.append(text))
    window = hostile_window
    spec = window.session.spec
    empty = spec.with_states(spec.states + (State(MARK, ()),))
    window.session.edit_spec(empty, "Add a state")
    window.show_page(PAGES.index("States"))
    settle(qtbot)
    assert_shown_as_written(shown_texts(window))  # the page's own message about the state
    assert not window.estimate()
    assert len(asked) == 1 and MARK in displayed(asked[0])
    window.worker.start(_fails_naming_the_item)
    qtbot.waitUntil(lambda: window.findChild(QMessageBox, "estimationErrorBox") is not None,
                    timeout=10_000)
    box = window.findChild(QMessageBox, "estimationErrorBox")
    assert MARK in displayed(box.text(), box.textFormat())
    box.close()


def _fails_naming_the_item(monitor=None):
    from lagwise.models.errors import DataError

    raise DataError(f"diary.csv, column '{ITEM}', row 5: 'often' is not a number")


def test_import_dialog_shows_column_names_as_written(qtbot, lagwise_app, tmp_path):
    window = open_window(qtbot)
    path = tmp_path / "diary.csv"
    path.write_text(f"day,prompt,{ITEM},calm\n1,1,3,4\n1,2,often,5\n1,3,2,2\n", encoding="utf-8")
    dialog = window.import_dialog(path)
    qtbot.addWidget(dialog)
    dialog.role_box(ITEM).setCurrentText("item")
    settle(qtbot)
    texts = shown_texts(dialog)
    assert any(MARK in text and "often" in text for where, text in texts
               if where.startswith("label"))  # the error quotes the column as written
    assert_shown_as_written(texts)
    dialog.reject()
