"""State scores tab: each state's score at every prompt, from the exact estimator.

One plot per state: the score using the whole diary (technically the smoothed score) as a
line with its 95% band (score ± 1.96 SD), optionally the score using earlier prompts only (the
filtered score: the prompts up to each one). The window says it in those plain words; the
technical terms are in the tooltips and the CSV headers. Days are
shaded alternately; a missed prompt (no item of the model answered) is a grey tick under the
plot, and the line across it is dotted: there the score is the model's bridge between the
neighbouring answers, and the band widens. The line and band break between segments (by
default each day), where the exact estimator restarts the states.

Every number is read from `FitResult.state_scores` (models.results.StateScores, band ends
included); the diary, given with `set_diary`, only places the prompts on days.
"""

from __future__ import annotations

import html

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtGui import QBrush, QColor, QPainterPath, QPen
from PySide6.QtWidgets import (QCheckBox, QGraphicsPathItem, QLabel, QScrollArea, QStackedWidget,
                               QVBoxLayout, QWidget)

from lagwise.desktop.results.charts import style_plot
from lagwise.desktop.results.tables import Column, RecordsModel
from lagwise.desktop.results.widgets import ResultsPanel, note_label
from lagwise.desktop.style import DAY_SHADE, INK, MUTED, POSITIVE, RULE, SERIES
from lagwise.models.diary import Diary
from lagwise.models.results import FitResult, StateScores

ROW_HEIGHT = 170       # pixels per state plot
MAX_DAY_TICKS = 14
SMOOTHED = POSITIVE    # deep teal: the score using the whole diary (smoothed) and its band
FILTERED = SERIES[1]   # slate blue: the score using earlier prompts only (filtered)
WHOLE = "using the whole diary"
EARLIER = "using earlier prompts only"
TERMS = ("Technical terms: the score using the whole diary is the smoothed score (Kalman "
         "smoother); the score using earlier prompts only is the filtered score (Kalman filter).")
BAND_ALPHA = 0.20
BAND_SWATCH = "#d1e5e4"  # the band's colour on white (deep teal at BAND_ALPHA), for the legend

NOT_EXACT = ("State scores come from the exact estimator: choose it on the Dynamics page "
             "(Estimator: exact, Kalman filter) and press Estimate.")

READING = ("The score <b>using the whole diary</b> is the best guess of the state at each "
           "prompt from every answer, before and after it; the band holds it with 95% "
           "probability if the model is right (score ± 1.96 SD). The score <b>using earlier "
           "prompts only</b> uses the prompts up to that one, as an observer following the "
           "diary live would. Scores are deviations from the person's "
           "usual level (0) in the units of each state's marker item (or of its innovations). "
           "Shaded: every other day. Grey ticks: missed prompts, where the dotted line bridges "
           "the neighbouring answers and the band widens.")


class StateScoresPanel(ResultsPanel):
    """Plots and table of `result.state_scores` (see the module docstring)."""

    name = "state scores"

    def __init__(self, parent=None):
        super().__init__("State scores over time", parent)
        self._result: FitResult | None = None
        self._diary: Diary | None = None
        self.curves: dict[str, pg.PlotDataItem] = {}
        self.filtered_curves: dict[str, pg.PlotDataItem] = {}
        self.bands: dict[str, QGraphicsPathItem] = {}
        self.filtered_box = QCheckBox(f"Also show the scores {EARLIER}")
        self.filtered_box.setToolTip("Also draw each state's score from the prompts up to that "
                                     "one only (technically the filtered score, from the Kalman "
                                     "filter)")
        self.filtered_box.toggled.connect(self._show_filtered)
        self.head.insertWidget(self.head.indexOf(self.export_button), self.filtered_box)

        self.stack = QStackedWidget()
        self.message = QLabel(NOT_EXACT)
        self.message.setObjectName("stateScoresMessage")
        self.message.setWordWrap(True)
        self.message.setAlignment(Qt.AlignmentFlag.AlignCenter)
        self.message.setStyleSheet(f"color: {MUTED}; font-size: 12pt; padding: 40px;")
        self.stack.addWidget(self.message)

        page = QWidget()
        column = QVBoxLayout(page)
        column.setContentsMargins(0, 0, 0, 0)
        self.legend = QLabel()
        self.legend.setTextFormat(Qt.TextFormat.RichText)
        self.legend.setToolTip(TERMS)
        column.addWidget(self.legend)
        self.note = note_label()
        self.note.setObjectName("stateScoresNote")
        column.addWidget(self.note)
        self.plots = pg.GraphicsLayoutWidget()
        self.plots.setObjectName("stateScorePlots")
        self.plots.setBackground("w")
        self.plots.ci.setSpacing(2)
        self.scroll = QScrollArea()
        self.scroll.setWidgetResizable(True)
        self.scroll.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.scroll.setWidget(self.plots)
        column.addWidget(self.scroll, 1)
        self.guide = note_label(READING)
        self.guide.setTextFormat(Qt.TextFormat.RichText)
        self.guide.setToolTip(TERMS)
        column.addWidget(self.guide)
        self.stack.addWidget(page)
        self.plot_page = page
        self.body.addWidget(self.stack, 1)

        self.model = RecordsModel((), parent=self)
        self._update_legend()
        self._clear()

    # ----- feeding ------------------------------------------------------------------------
    @property
    def has_scores(self) -> bool:
        return self.stack.currentWidget() is self.plot_page

    def set_diary(self, diary: Diary | None) -> None:
        """The diary the prompts belong to (its days, segments and missed prompts)."""
        if diary is self._diary:
            return
        self._diary = diary
        if self._result is not None:
            self.show_result(self._result)

    def show_result(self, result: FitResult) -> None:
        self._result = result
        scores = result.state_scores if result is not None else None
        if scores is None:
            self._clear()
            return
        self._draw(result, scores)

    def _clear(self) -> None:
        self.plots.clear()
        self.curves, self.filtered_curves, self.bands = {}, {}, {}
        self.model = RecordsModel((), parent=self)
        self.filtered_box.setEnabled(False)
        self.filtered_box.hide()
        self.export_button.setEnabled(False)
        self.stack.setCurrentWidget(self.message)

    # ----- drawing ------------------------------------------------------------------------
    def _draw(self, result: FitResult, scores: StateScores) -> None:
        smoothed, filtered = scores.smoothed, scores.filtered
        lows, highs = scores.band("smoothed", 0.95)
        n, k = smoothed.shape
        states = list(result.spec.state_names)
        layout = _Layout.of(self._diary, result, n)
        self.plots.clear()
        self.curves, self.filtered_curves, self.bands = {}, {}, {}
        self.plots.setMinimumHeight(k * ROW_HEIGHT + 30)
        x = np.arange(n, dtype=float)
        ticks = layout.day_ticks()
        first = None
        for j, state in enumerate(states):
            plot = self.plots.addPlot(row=j, col=0)
            style_plot(plot, html.escape(state))
            plot.setMouseEnabled(x=True, y=False)  # long diaries: zoom and pan along time
            plot.setLabel("left", "score", color=INK)
            plot.getAxis("left").setWidth(60)
            plot.getAxis("bottom").setTicks([ticks, []])
            if j < k - 1:
                plot.getAxis("bottom").setStyle(showValues=False)
            else:
                plot.setLabel("bottom", "day (tick at its first prompt)", color=INK)
            m, low, high = smoothed[:, j], lows[:, j], highs[:, j]
            span = (float(np.nanmin(low)), float(np.nanmax(high)))
            pad = 0.06 * max(span[1] - span[0], 1e-9)
            bottom, top = span[0] - 2.5 * pad, span[1] + pad
            for a, b in layout.odd_days():
                shade = pg.BarGraphItem(x0=[a - 0.5], width=[b - a], y0=[bottom], height=[top - bottom],
                                        brush=pg.mkBrush(DAY_SHADE), pen=pg.mkPen(None))
                shade.setZValue(-20)
                plot.addItem(shade)
            plot.addItem(pg.InfiniteLine(pos=0, angle=0, pen=pg.mkPen(RULE, width=1)))
            band = _band(layout.segments, low, high)
            plot.addItem(band)
            self.bands[state] = band
            bridge = pg.PlotDataItem(x, m, connect=layout.bridges(),
                                     pen=pg.mkPen(SMOOTHED, width=1.3, style=Qt.PenStyle.DotLine))
            plot.addItem(bridge)
            curve = pg.PlotDataItem(x, m, connect=layout.answered_links(),
                                    pen=pg.mkPen(SMOOTHED, width=1.8))
            curve.setZValue(5)
            plot.addItem(curve)
            self.curves[state] = curve
            dots = layout.answered
            plot.addItem(pg.ScatterPlotItem(x[dots], m[dots], size=3.5, pen=None,
                                            brush=pg.mkBrush(SMOOTHED)))
            trace = pg.PlotDataItem(x, filtered[:, j], connect=layout.same_segment(),
                                    pen=pg.mkPen(FILTERED, width=1.2))
            trace.setZValue(4)
            trace.setVisible(self.filtered_box.isChecked())
            plot.addItem(trace)
            self.filtered_curves[state] = trace
            missed = np.flatnonzero(~layout.answered)
            if missed.size:
                plot.addItem(pg.ScatterPlotItem(x[missed], np.full(missed.size, bottom + pad),
                                                symbol="t1", size=6, pen=None,
                                                brush=pg.mkBrush(MUTED)))
            plot.setYRange(bottom, top, padding=0)
            if first is None:
                first = plot
                plot.setXRange(-0.5, n - 0.5, padding=0)
            else:
                plot.setXLink(first)
        self.filtered_box.setEnabled(True)
        self.filtered_box.show()
        self.export_button.setEnabled(True)
        self._fill_table(states, layout, scores)
        self.note.setText(self._summary(result, layout, n))
        self.stack.setCurrentWidget(self.plot_page)

    def _summary(self, result: FitResult, layout: "_Layout", n: int) -> str:
        gap = result.options.night_gap
        night = ("the states restart at the start of each segment (by default each day)"
                 if gap is None else
                 f"each night is bridged as {gap} missed prompt{'s' if gap != 1 else ''}, so the "
                 "states carry over from one day to the next")
        text = (f"{n} prompts, {int(layout.answered.sum())} with at least one answer; {night}.")
        if layout.mismatch:
            text += (" The diary has changed since this estimate (or is not known): the days "
                     "and missed prompts of the estimate cannot be shown. Estimate again.")
        return text

    def _show_filtered(self, shown: bool) -> None:
        for trace in self.filtered_curves.values():
            trace.setVisible(shown)
        self._update_legend()

    def _update_legend(self) -> None:
        parts = [f"<span style='color:{SMOOTHED}; font-weight:700'>━━</span> score {WHOLE}",
                 f"<span style='background-color:{BAND_SWATCH}'>&nbsp;&nbsp;&nbsp;&nbsp;</span> 95% band",
                 f"<span style='color:{SMOOTHED}'>┅┅</span> across missed prompts"]
        if self.filtered_box.isChecked():
            parts.append(f"<span style='color:{FILTERED}; font-weight:700'>━━</span> score {EARLIER}")
        parts.append(f"<span style='color:{MUTED}'>▲</span> missed prompt")
        self.legend.setText("&nbsp;&nbsp;&nbsp;".join(parts))

    def _fill_table(self, states, layout: "_Layout", scores: StateScores):
        columns = [Column("Prompt", lambda r: r[0], "int"),
                   Column("Day", lambda r: r[1], "text"),
                   Column("Prompt of the day", lambda r: r[2], "text"),
                   Column("Answered", lambda r: r[3], "text")]
        for j, state in enumerate(states):
            base = 4 + 6 * j
            for offset, what in enumerate((f"{WHOLE} (smoothed)", f"{WHOLE} (smoothed) SD",
                                           "lower 95%", "upper 95%", f"{EARLIER} (filtered)",
                                           f"{EARLIER} (filtered) SD")):
                columns.append(Column(f"{state} {what}", lambda r, c=base + offset: r[c]))
        rows = []
        smoothed, smoothed_sd = scores.smoothed, scores.smoothed_sd
        filtered, filtered_sd = scores.filtered, scores.filtered_sd
        low, high = scores.band("smoothed", 0.95)
        for t in range(smoothed.shape[0]):
            row = [t + 1, layout.day_label(t), layout.prompt_label(t),
                   "yes" if layout.answered[t] else "no"]
            for j in range(len(states)):
                row += [smoothed[t, j], smoothed_sd[t, j], low[t, j], high[t, j],
                        filtered[t, j], filtered_sd[t, j]]
            rows.append(tuple(row))
        self.model = RecordsModel(columns, rows, parent=self)

    # ----- export -------------------------------------------------------------------------
    def pictures(self) -> dict:
        return {"state scores": self.plots} if self.has_scores else {}

    def tables(self) -> dict:
        return {"state scores": self.model} if self.has_scores else {}


class _Layout:
    """Where the prompts of the estimate sit: days, segments and answered prompts."""

    def __init__(self, n: int, day: np.ndarray, labels: list[str], segment: np.ndarray,
                 prompt: np.ndarray, answered: np.ndarray, mismatch: bool):
        self.n, self.day, self.labels, self.segment = n, day, labels, segment
        self.prompt, self.answered, self.mismatch = prompt, answered, mismatch
        self.segments = _runs(segment)

    @classmethod
    def of(cls, diary: Diary | None, result: FitResult, n: int) -> "_Layout":
        if diary is None or diary.n_occasions != n or not set(result.spec.items) <= set(diary.items):
            zeros = np.zeros(n, dtype=np.int64)
            return cls(n, zeros, [""], zeros, np.full(n, np.nan), np.ones(n, dtype=bool), True)
        columns = [diary.items.index(item) for item in result.spec.items]
        answered = ~np.isnan(diary.values[:, columns]).all(axis=1)
        return cls(n, np.asarray(diary.day), list(diary.day_labels), np.asarray(diary.segment),
                   np.asarray(diary.prompt, dtype=float), answered, False)

    def day_starts(self) -> np.ndarray:
        return np.concatenate([[0], np.flatnonzero(np.diff(self.day)) + 1]) if self.n else np.zeros(0, int)

    def day_ticks(self) -> list[tuple[float, str]]:
        if self.mismatch:
            step = max(1, self.n // 10)
            return [(float(t), str(t + 1)) for t in range(0, self.n, step)]
        starts = self.day_starts()
        step = max(1, int(np.ceil(len(starts) / MAX_DAY_TICKS)))
        return [(float(s), _short_day(self.labels[self.day[s]])) for s in starts[::step]]

    def odd_days(self) -> list[tuple[int, int]]:
        if self.mismatch:
            return []
        starts = self.day_starts()
        ends = np.append(starts[1:], self.n)
        return [(int(starts[d]), int(ends[d])) for d in range(1, len(starts), 2)]

    def same_segment(self) -> np.ndarray:
        """connect[t]: draw the line from prompt t to t+1 (same segment)."""
        return np.append(self.segment[1:] == self.segment[:-1], False)

    def answered_links(self) -> np.ndarray:
        both = self.answered[1:] & self.answered[:-1]
        return self.same_segment() & np.append(both, False)

    def bridges(self) -> np.ndarray:
        """Links that touch a missed prompt (drawn dotted)."""
        either = ~(self.answered[1:] & self.answered[:-1])
        return self.same_segment() & np.append(either, False)

    def day_label(self, t: int) -> str:
        return "" if self.mismatch else self.labels[self.day[t]]

    def prompt_label(self, t: int) -> str:
        p = self.prompt[t]
        return "" if not np.isfinite(p) else str(int(p))


def _runs(segment: np.ndarray) -> list[tuple[int, int]]:
    """(start, end) of each run of equal segment ids."""
    if segment.size == 0:
        return []
    starts = np.concatenate([[0], np.flatnonzero(np.diff(segment)) + 1])
    ends = np.append(starts[1:], segment.size)
    return list(zip(starts.tolist(), ends.tolist()))


def _band(runs: list[tuple[int, int]], low: np.ndarray, high: np.ndarray) -> QGraphicsPathItem:
    """One filled polygon per segment between `low` and `high` (data coordinates)."""
    path = QPainterPath()
    for a, b in runs:
        xs = np.arange(a, b, dtype=float)
        if b - a == 1:  # a one-prompt segment: a thin bar
            xs = np.array([a - 0.2, a + 0.2])
            top, bottom = np.repeat(high[a], 2), np.repeat(low[a], 2)
        else:
            top, bottom = high[a:b], low[a:b]
        path.moveTo(xs[0], top[0])
        for xv, yv in zip(xs[1:], top[1:]):
            path.lineTo(xv, yv)
        for xv, yv in zip(xs[::-1], bottom[::-1]):
            path.lineTo(xv, yv)
        path.closeSubpath()
    item = QGraphicsPathItem(path)
    fill = QColor(SMOOTHED)
    fill.setAlphaF(BAND_ALPHA)
    item.setBrush(QBrush(fill))
    item.setPen(QPen(Qt.PenStyle.NoPen))
    item.setZValue(-5)
    return item


def _short_day(label: str) -> str:
    """'2026-03-08' -> '03-08'; other labels as they are."""
    return label[5:] if len(label) == 10 and label[4] == "-" and label[7] == "-" else label
