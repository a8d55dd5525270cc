"""Bar charts (pyqtgraph) in the results look: sign colours, dashed outline below zero.

Drawing only: bar heights, interval ends and value labels arrive from the views, which read
them from the FitResult.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtGui import QColor, QFont

from lagwise.desktop.results.palette import NEGATIVE, NEUTRAL, POSITIVE
from lagwise.desktop.style import INK


def style_plot(plot: pg.PlotItem, title: str) -> None:
    """White background look: dark axes, no grid, a bold title, no mouse zoom."""
    plot.setTitle(f"<span style='color:{INK}; font-weight:600'>{title}</span>")
    for name in ("left", "bottom"):
        axis = plot.getAxis(name)
        axis.setPen(pg.mkPen(INK))
        axis.setTextPen(pg.mkPen(INK))
        axis.enableAutoSIPrefix(False)
    plot.hideButtons()
    plot.setMenuEnabled(False)
    plot.setMouseEnabled(x=False, y=False)
    plot.showGrid(x=False, y=False)


def _brushes(values: Sequence[float], signed: bool) -> tuple[list, list]:
    brushes, pens = [], []
    for v in values:
        if not signed:
            color = QColor(NEUTRAL)
            pen = pg.mkPen(color, width=1)
        elif v >= 0:
            color = QColor(POSITIVE)
            pen = pg.mkPen(color, width=1)
        else:
            color = QColor(NEGATIVE)
            pen = pg.mkPen(INK, width=1.4, style=Qt.PenStyle.DashLine)
        fill = QColor(color)
        fill.setAlphaF(0.85)
        brushes.append(pg.mkBrush(fill))
        pens.append(pen)
    return brushes, pens


def bar_chart(plot: pg.PlotItem, categories: Sequence[str], values: Sequence[float | None],
              labels: Sequence[str], *, low: Sequence[float | None] | None = None,
              high: Sequence[float | None] | None = None, horizontal: bool = False,
              signed: bool = True, value_axis: str = "", limits: tuple[float, float] | None = None) -> None:
    """Draw one bar per category with its value label; optional interval whiskers.

    Missing values (None) leave their category empty. `limits` fixes the value axis.
    """
    plot.clear()
    positions = np.arange(len(categories), dtype=float)
    shown = [i for i, v in enumerate(values) if v is not None]
    heights = np.array([float(values[i]) for i in shown])
    at = positions[shown]
    brushes, pens = _brushes(heights, signed)
    if horizontal:
        bars = pg.BarGraphItem(x0=np.minimum(heights, 0), y=at, width=np.abs(heights), height=0.62,
                               brushes=brushes, pens=pens)
    else:
        bars = pg.BarGraphItem(x=at, y0=np.minimum(heights, 0), height=np.abs(heights), width=0.62,
                               brushes=brushes, pens=pens)
    plot.addItem(bars)
    ends = heights.copy()
    if low is not None and high is not None:
        keep = [j for j, i in enumerate(shown) if low[i] is not None and high[i] is not None]
        lo = np.array([float(low[shown[j]]) for j in keep])
        hi = np.array([float(high[shown[j]]) for j in keep])
        mid = heights[keep]
        whisker = dict(pen=pg.mkPen(INK, width=1.6), beam=0.22)
        if horizontal:
            plot.addItem(pg.ErrorBarItem(x=mid, y=at[keep], left=mid - lo, right=hi - mid, **whisker))
        else:
            plot.addItem(pg.ErrorBarItem(x=at[keep], y=mid, top=hi - mid, bottom=mid - lo, **whisker))
        for j, (l, h) in zip(keep, zip(lo, hi)):
            ends[j] = h if heights[j] >= 0 else l
    zero = pg.InfiniteLine(pos=0, angle=90 if horizontal else 0, pen=pg.mkPen(INK, width=1))
    plot.addItem(zero)
    font = QFont()
    font.setPointSizeF(9)
    for j, i in enumerate(shown):
        text = pg.TextItem(labels[i], color=INK,
                           anchor=((0, 0.5) if ends[j] >= 0 else (1, 0.5)) if horizontal
                           else ((0.5, 1) if ends[j] >= 0 else (0.5, 0)))
        text.setFont(font)
        text.setPos(*((ends[j], at[j]) if horizontal else (at[j], ends[j])))
        plot.addItem(text)
    ticks = [list(zip(positions, categories))]
    category_axis = plot.getAxis("left" if horizontal else "bottom")
    category_axis.setTicks(ticks)
    category_axis.setStyle(tickLength=0)
    if value_axis:
        plot.setLabel("bottom" if horizontal else "left", value_axis, color=INK)
    span = (-0.6, len(categories) - 0.4)
    if limits is None:
        extent = np.concatenate([ends, heights, [0.0]])
        pad = 0.18 * max(float(np.ptp(extent)), 0.2)
        limits = (min(float(extent.min()) - (pad if extent.min() < 0 else 0), 0.0),
                  max(float(extent.max()) + pad, 0.0))
    if horizontal:
        plot.setYRange(*span, padding=0)
        plot.setXRange(*limits, padding=0.02)
        plot.invertY(True)
    else:
        plot.setXRange(*span, padding=0)
        plot.setYRange(*limits, padding=0.02)


def plot_widget() -> pg.PlotWidget:
    widget = pg.PlotWidget(background="w")
    widget.setMinimumSize(260, 220)
    return widget
