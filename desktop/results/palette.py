"""Colours, pens and line widths of the results pictures (DEVELOPERS.md, "Look").

Colours come from desktop.style: positive effects solid deep teal, negative effects dashed
burnt orange (colour-blind safe; the dash keeps the sign readable in greyscale). Line width
grows with the size of the standardized effect and saturates at 0.6, because lagged effects
are mostly well below that. A path whose 95% interval includes 0 is drawn faint: thin and
light, in the same hue and dash. Matrix cells are tinted on one scale that runs from light
orange through a neutral grey to light teal (`tint`), so no cell reads as a heat map.
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
FAINT_LIGHTEN = 0.5       # share of white mixed into a faint path's colour
TINT_GREY = "#e6e6e6"     # the tint scale's neutral midpoint
TINT_LIGHTEN = 0.4        # share of white mixed into the tint scale's ends


def mix(color: str | QColor, other: str | QColor, share: float) -> QColor:
    """`color` with `share` of `other` mixed in (linear in RGB). Mixing with white or a
    neutral grey keeps the hue: every channel's distance from the grey shrinks alike."""
    a, b = QColor(color), QColor(other)
    return QColor.fromRgbF(*((1 - share) * x + share * y for x, y in
                             zip(a.getRgbF()[:3], b.getRgbF()[:3])))


def tint(value: float) -> QColor:
    """Cell colour for a value in [-1, 1]: light orange - neutral grey (0) - light teal."""
    end = mix(POSITIVE if value >= 0 else NEGATIVE, PAPER, TINT_LIGHTEN)
    return mix(TINT_GREY, end, min(abs(float(value)), 1.0))


def line_width(size: float | None) -> float:
    """Pen width for an effect of standardized size |size| (1.2 px at 0, 9 px at 0.6 or more)."""
    if size is None:
        return MIN_WIDTH
    return MIN_WIDTH + (MAX_WIDTH - MIN_WIDTH) * min(abs(float(size)) / 0.6, 1.0)


def sign_color(value: float, firm: bool = True) -> QColor:
    """Teal for value >= 0, burnt orange below 0; light (mixed with white) when not `firm`."""
    color = QColor(POSITIVE if value >= 0 else NEGATIVE)
    return color if firm else mix(color, PAPER, FAINT_LIGHTEN)


def effect_pen(value: float, size: float | None, firm: bool = True) -> QPen:
    """Solid teal for value >= 0, dashed burnt orange below 0, width by |size|; a path that is
    not `firm` (its interval includes 0) is thin and light."""
    pen = QPen(sign_color(value, firm), line_width(size) if firm else MIN_WIDTH)
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
