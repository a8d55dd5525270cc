"""The two lines around every results tab: the warnings strip above, the caution line below.

`WarningsStrip` shows the engine's list of warnings about the shown fit
(models.advice.fit_warnings): collapsed, one line with the count and the titles; expanded,
each title with its plain explanation. `CautionLine` shows the fit's cautions the same way:
one line, the full text on demand. Both only show text the engine wrote.
"""

from __future__ import annotations

import html

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QFrame, QHBoxLayout, QLabel, QScrollArea, QSizePolicy, QToolButton, QVBoxLayout

from lagwise.desktop.results.palette import NEGATIVE, POSITIVE
from lagwise.desktop.style import plain
from lagwise.models.advice import Advice, caution_line
from lagwise.models.results import FitResult

_TONES = {"warn": f"background:#fbeee9; border-left:5px solid {NEGATIVE}; color:#3a1d16;",
          "calm": f"background:#e8f3f2; border-left:5px solid {POSITIVE}; color:#12403d;",
          "caution": "background:#f7f3ea; border-left:5px solid #b8a67e; color:#3d3a33;"}
EXPANDED_HEIGHT = 180  # the open list scrolls beyond this, so the tabs keep their room


def count_words(n: int) -> str:
    return f"{n} warning" + ("" if n == 1 else "s")


class _FoldingLine(QFrame):
    """One elided line with a Show/Hide button; the full text below it when open."""

    def __init__(self, name: str, parent=None):
        super().__init__(parent)
        self.setObjectName(name)
        self._tone = ""
        self.line = QLabel()
        self.line.setObjectName(name + "Line")
        self.line.setTextFormat(Qt.TextFormat.PlainText)
        self.line.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        self.toggle = QToolButton()
        self.toggle.setCheckable(True)
        self.toggle.setAutoRaise(True)
        self.toggle.toggled.connect(self._fold)
        self.details = QLabel()
        self.details.setObjectName(name + "Details")
        self.details.setWordWrap(True)
        self.details.setTextFormat(Qt.TextFormat.RichText)
        self.details.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.details.setAlignment(Qt.AlignmentFlag.AlignTop | Qt.AlignmentFlag.AlignLeft)
        self.scroll = QScrollArea()
        self.scroll.setWidget(self.details)
        self.scroll.setWidgetResizable(True)
        self.scroll.setFrameShape(QFrame.Shape.NoFrame)
        self.scroll.setStyleSheet("background: transparent;")
        row = QHBoxLayout()
        row.setContentsMargins(0, 0, 0, 0)
        row.addWidget(self.line, 1)
        row.addWidget(self.toggle)
        column = QVBoxLayout(self)
        column.setContentsMargins(10, 2, 4, 2)
        column.setSpacing(2)
        column.addLayout(row)
        column.addWidget(self.scroll)
        self._full = ""
        self._fold(False)

    def _set(self, line: str, details: str, tone: str, foldable: bool = True) -> None:
        self._full = line
        self.line.setToolTip(plain(line))
        self.details.setText(details)
        if tone != self._tone:  # restyling costs milliseconds: only when the tone changes
            self._tone = tone
            self.setStyleSheet(f"#{self.objectName()} {{{_TONES[tone]}}}")
        self.toggle.setVisible(foldable)
        if not foldable:
            self.toggle.setChecked(False)
        self._elide()
        self._fit_details()

    def _fold(self, open_: bool) -> None:
        self.scroll.setVisible(open_)
        self.toggle.setText("Hide" if open_ else "Show all")
        self._fit_details()

    def _fit_details(self) -> None:
        """The open text at its full height, up to EXPANDED_HEIGHT (then it scrolls)."""
        width = self.scroll.viewport().width() or self.width()
        needed = self.details.heightForWidth(max(100, width)) + 4
        self.scroll.setFixedHeight(min(EXPANDED_HEIGHT, needed))

    @property
    def expanded(self) -> bool:
        return self.scroll.isVisible()

    def full_text(self) -> str:
        """The collapsed line's whole text (the screen may show it shortened)."""
        return self._full

    def _elide(self) -> None:
        width = max(40, self.line.width())
        self.line.setText(self.line.fontMetrics().elidedText(self._full, Qt.TextElideMode.ElideRight, width))

    def resizeEvent(self, event) -> None:
        super().resizeEvent(event)
        self._elide()
        if event.size().width() != event.oldSize().width():
            self._fit_details()


class WarningsStrip(_FoldingLine):
    """The count and titles of the warnings on one line; each explained when opened."""

    def __init__(self, parent=None):
        super().__init__("warningsStrip", parent)
        self.warnings: tuple[Advice, ...] = ()

    def show_warnings(self, warnings: tuple[Advice, ...], all_clear: str) -> None:
        """The engine's warnings, or its `all_clear` sentence when there are none."""
        self.warnings = tuple(warnings)
        if not warnings:
            self._set(all_clear, "", "calm", foldable=False)
            return
        titles = " · ".join(w.title for w in warnings)
        items = "".join(f"<li style='margin-bottom:4px'><b>{html.escape(w.title)}.</b> "
                        f"{html.escape(w.explanation)}</li>" for w in warnings)
        self._set(f"⚠ {count_words(len(warnings))}: {titles}",
                  f"<ul style='margin:0 0 0 -20px'>{items}</ul>", "warn")


class CautionLine(_FoldingLine):
    """The fit's cautions: the first on one line, all of them when opened."""

    def __init__(self, parent=None):
        super().__init__("cautionLine", parent)

    def show_result(self, result: FitResult) -> None:
        self._set(caution_line(result),
                  "<br><br>".join(html.escape(c) for c in result.cautions), "caution")
