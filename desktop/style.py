"""The window's look: colours, pens, palette and fonts (DEVELOPERS.md, "Look").

Positive effects are drawn solid in deep teal, negative effects dashed in burnt orange;
the pair is colour-blind safe and the dash keeps them apart in greyscale. Everything
else is quiet greys so the effects stand out.
"""

from __future__ import annotations

from PySide6 import QtGui
from PySide6.QtCore import Qt
from PySide6.QtGui import QColor, QFont, QPalette, QPen
from PySide6.QtWidgets import QApplication

from lagwise.models.reporting.palette import INK, MUTED, NEGATIVE, POSITIVE, RULE  # noqa: F401

DAY_SHADE = "#eef2f3"  # every other day in time-series plots
PAPER = "#ffffff"      # plot and picture background
PANEL = "#f6f8f8"      # window background
SELECTION = "#cfe6e4"  # selected rows (a light tint of the positive colour)
NOTE = "#2f5d8a"       # plain-word notes
WARNING = "#8a4b00"    # problems the user must fix (dark amber, read with an icon)

SERIES = ("#1b7f79", "#3b5b92", "#7a5195", "#5b6b2f", "#8a6d3b", "#2f4f4f")


def effect_pen(value: float, width: float = 2.0) -> QPen:
    """Solid teal pen for a positive effect, dashed orange pen for a negative one."""
    pen = QPen(QColor(POSITIVE if value >= 0 else NEGATIVE))
    pen.setWidthF(width)
    pen.setCapStyle(Qt.PenCapStyle.RoundCap)
    if value < 0:
        pen.setStyle(Qt.PenStyle.DashLine)
    return pen


def effect_width(standardized: float, thinnest: float = 1.0, thickest: float = 8.0) -> float:
    """Line width growing with the absolute standardised effect (|effect| 1 -> thickest)."""
    size = min(abs(float(standardized)), 1.0)
    return thinnest + (thickest - thinnest) * size


def apply_style(app: QApplication) -> None:
    """Fusion style with a light, quiet palette and plot defaults for pyqtgraph."""
    import pyqtgraph as pg

    app.setStyle("Fusion")
    palette = QPalette()
    roles = {
        QPalette.ColorRole.Window: PANEL,
        QPalette.ColorRole.WindowText: INK,
        QPalette.ColorRole.Base: PAPER,
        QPalette.ColorRole.AlternateBase: "#f1f4f4",
        QPalette.ColorRole.Text: INK,
        QPalette.ColorRole.Button: "#eceff0",
        QPalette.ColorRole.ButtonText: INK,
        QPalette.ColorRole.Highlight: SELECTION,
        QPalette.ColorRole.HighlightedText: INK,
        QPalette.ColorRole.ToolTipBase: PAPER,
        QPalette.ColorRole.ToolTipText: INK,
        QPalette.ColorRole.PlaceholderText: MUTED,
        QPalette.ColorRole.Link: NOTE,
    }
    for role, colour in roles.items():
        palette.setColor(role, QColor(colour))
    palette.setColor(QPalette.ColorGroup.Disabled, QPalette.ColorRole.Text, QColor(MUTED))
    palette.setColor(QPalette.ColorGroup.Disabled, QPalette.ColorRole.ButtonText, QColor(MUTED))
    palette.setColor(QPalette.ColorGroup.Disabled, QPalette.ColorRole.WindowText, QColor(MUTED))
    app.setPalette(palette)
    font = QFont(app.font())
    if font.pointSizeF() < 10:
        font.setPointSizeF(10)
    app.setFont(font)
    pg.setConfigOptions(background=PAPER, foreground=INK, antialias=True)


def heading_font(base: QFont, step: float = 3.0) -> QFont:
    """A bold font `step` points larger than `base`, for page titles."""
    font = QFont(base)
    font.setPointSizeF(base.pointSizeF() + step)
    font.setBold(True)
    return font


def plain(text: str) -> str:
    """`text` for a place where Qt reads markup-looking text as rich text (tooltips, message
    boxes, labels in the automatic format): converted so it shows as written, markup and all
    (unchanged when Qt would show it as plain text anyway)."""
    return QtGui.Qt.convertFromPlainText(text) if QtGui.Qt.mightBeRichText(text) else text
