"""Colours, pens and line widths of the results pictures (DEVELOPERS.md, "Look").

Colours come from desktop.style: positive effects solid deep teal, negative effects dashed
burnt orange (colour-blind safe; the dash keeps the sign readable in greyscale). Line width
grows with the size of the standardized effect and saturates at 0.6, because lagged effects
are mostly well below that.
"""

from __future__ import annotations

from PySide6.QtCore import Qt
from PySide6.QtGui import QColor, QPen

from lagwise.desktop.style import MUTED, NEGATIVE, PAPER, POSITIVE

NEUTRAL = MUTED
NODE_FILL = "#eef5f4"
LABEL_FILL = PAPER

MIN_WIDTH = 1.2
MAX_WIDTH = 9.0


def line_width(size: float | None) -> float:
    """Pen width for an effect of standardized size |size| (1.2 px at 0, 9 px at 0.6 or more)."""
    if size is None:
        return MIN_WIDTH
    return MIN_WIDTH + (MAX_WIDTH - MIN_WIDTH) * min(abs(float(size)) / 0.6, 1.0)


def sign_color(value: float) -> QColor:
    return QColor(POSITIVE if value >= 0 else NEGATIVE)


def effect_pen(value: float, size: float | None) -> QPen:
    """Solid teal for value >= 0, dashed burnt orange below 0, width by |size|."""
    pen = QPen(sign_color(value), line_width(size))
    pen.setCapStyle(Qt.PenCapStyle.FlatCap)
    pen.setJoinStyle(Qt.PenJoinStyle.RoundJoin)
    if value < 0:
        pen.setStyle(Qt.PenStyle.CustomDashLine)
        width = pen.widthF()
        pen.setDashPattern([max(3.0, 14.0 / width), max(2.0, 8.0 / width)])
    return pen


def is_negative_pen(pen: QPen) -> bool:
    """True for the dashed burnt-orange pen of a negative effect."""
    return pen.style() != Qt.PenStyle.SolidLine and pen.color() == QColor(NEGATIVE)
