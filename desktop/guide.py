"""The built-in guide: resources/guide.html in a browser window, opened at a section.

The guide is plain HTML shipped with the package (lagwise.resources.guide_html); links inside
it jump between its sections and nothing outside it is opened or loaded. Help > Lagwise guide
(F1) opens it at the section of the page in view; a small "?" button beside each page and
results-tab title (`add_guide_button`) opens it at that page's section.
"""

from __future__ import annotations

from collections.abc import Callable

from PySide6.QtCore import Qt, QUrl
from PySide6.QtWidgets import (QBoxLayout, QDialog, QHBoxLayout, QLabel, QTextBrowser,
                               QToolButton, QVBoxLayout, QWidget)

from lagwise.resources import guide_html

# results tab (ResultsPanel.name) -> its section in the guide
RESULTS_SECTIONS = {"measurement": "results-measurement", "dynamics": "results-dynamics",
                    "responses": "results-responses", "innovations": "results-innovations",
                    "fit": "results-fit", "parameters": "results-parameters",
                    "state scores": "results-state-scores", "lag-2 check": "results-lag2",
                    "stability": "results-stability", "runs": "results-runs",
                    "compare": "results-compare"}


class GuideWindow(QDialog):
    """The guide in a non-modal window; `show_section(anchor)` scrolls to a section."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("guideWindow")
        self.setWindowTitle("Lagwise guide")
        self.setModal(False)
        self.resize(720, 640)
        self.browser = QTextBrowser()
        self.browser.setObjectName("guideBrowser")
        self.browser.setOpenExternalLinks(False)
        self.browser.setOpenLinks(False)            # only jumps inside the guide
        self.browser.anchorClicked.connect(self._follow)
        self.browser.setHtml(guide_html())
        layout = QVBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)
        layout.addWidget(self.browser)
        self.section = "top"

    def show_section(self, anchor: str) -> None:
        """Show the window with `anchor`'s section at the top."""
        self.section = anchor
        self.show()
        self.raise_()
        self.activateWindow()
        self.browser.scrollToAnchor(anchor)

    def _follow(self, url: QUrl) -> None:
        if url.hasFragment() and not url.scheme() and not url.path():
            self.browser.scrollToAnchor(url.fragment())
            self.section = url.fragment()


def add_guide_button(title: QLabel, open_section: Callable[[], None], what: str) -> QToolButton:
    """A small "?" button just after `title` in its box layout (which must hold the title)."""
    button = QToolButton()
    button.setObjectName("guideButton")
    button.setText("?")
    button.setAutoRaise(True)
    button.setToolTip(f"What {what} shows: open the guide (F1)")
    button.setAccessibleName(f"Guide to {what}")
    button.setCursor(Qt.CursorShape.WhatsThisCursor)
    button.clicked.connect(lambda _=False: open_section())
    layout = title.parentWidget().layout()
    found = _holder(layout, title)
    if found is None:
        raise ValueError("the title is not in a box layout")
    holder, index = found
    if isinstance(holder, QHBoxLayout):
        holder.insertWidget(index + 1, button)
    else:                   # a column: the title and the button side by side in a new row
        holder.removeWidget(title)
        row = QHBoxLayout()
        row.addWidget(title)
        row.addWidget(button)
        row.addStretch(1)
        holder.insertLayout(index, row)
    return button


def _holder(layout, widget: QWidget):
    """(box layout holding `widget`, its index), searching nested layouts."""
    if layout is None:
        return None
    index = layout.indexOf(widget)
    if index >= 0 and isinstance(layout, QBoxLayout):
        return layout, index
    for i in range(layout.count()):
        inner = layout.itemAt(i).layout()
        if inner is not None:
            found = _holder(inner, widget)
            if found is not None:
                return found
    return None
