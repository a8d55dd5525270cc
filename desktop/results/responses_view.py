"""Responses tab: what follows a rise in one state over the next prompts.

The user picks the state that rises; one small plot per state shows its response prompt by
prompt with the band, rises solid deep teal and falls dashed amber orange. Switches: units
(standardized by default, or the states' own units), the kind of rise (a unit innovation, or
an orthogonalised one with the order of the states), the horizon and cumulative sums. A
table lists the plotted numbers, another the half-lives; the sentences say the same in words.

Every number is read from one models.responses.Responses (computed once per horizon and
order and kept, so switching views only redraws) and written by models.numbers.fmt.
"""

from __future__ import annotations

import html
import math

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QColor, QFont
from PySide6.QtWidgets import (QAbstractItemView, QCheckBox, QComboBox, QHBoxLayout, QLabel,
                               QListWidget, QListWidgetItem, QScrollArea, QSizePolicy, QSpinBox,
                               QSplitter, QTabWidget, QToolButton, QVBoxLayout, QWidget)

from lagwise.desktop.results.charts import style_plot
from lagwise.desktop.results.tables import Column, RecordsModel
from lagwise.desktop.results.widgets import ResultsPanel, fit_height, note_label, section_label, table_view
from lagwise.desktop.style import INK, MUTED, NEGATIVE, POSITIVE, RULE, plain
from lagwise.models.responses import (DEFAULT_HORIZON, MAX_HORIZON, Replicates, ResponseChoice,
                                      Responses, impulse_responses)
from lagwise.models.results import FitResult

COLUMNS_OF_PLOTS = 3
ROW_HEIGHT = 180
BAND = "#6b777d"          # neutral grey (MUTED) band, drawn at BAND_ALPHA
BAND_ALPHA = 0.22
BAND_SWATCH = "#d9dddf"   # the band's colour on white, for the legend
UNITS = {"standardized": "Standardized (SD)", "own": "States' own units"}
FORMS = {"unit": "Unit innovation", "orthogonal": "Orthogonalised (Cholesky)"}
INTERVAL_WORDS = {"delta": "delta method", "percentile": "bootstrap percentiles", "none": ""}

EXPLAIN = {
    ("unit", "standardized"): "A rise of one standard deviation of {shock} at prompt 0 (its innovation; "
                              "the other states' innovations 0); every response in standard deviations "
                              "of its own state.",
    ("unit", "own"): "A rise of 1 in {shock} at prompt 0 (its innovation, in its own units; the other "
                     "states' innovations 0); every response in its own state's units (those of its "
                     "marker item).",
    ("orthogonal", "standardized"): "A rise of one standard deviation in the part of {shock}'s innovation "
                                    "not shared with the states before it in the order; every response in "
                                    "standard deviations of its own state.",
    ("orthogonal", "own"): "A rise of one standard deviation in the part of {shock}'s innovation not "
                           "shared with the states before it in the order; every response in its own "
                           "state's units.",
}
CUMULATIVE = " Cumulative: the sum of the responses from prompt 0 up to each prompt."


class ResponsesPanel(ResultsPanel):
    """Plots, tables and sentences of `impulse_responses(result, horizon, order)`."""

    name = "responses"
    choice_changed = Signal()   # the user changed what the tab shows (see `response_choice`)

    def __init__(self, parent=None):
        super().__init__("Responses: what follows a rise in one state", parent)
        self._result: FitResult | None = None
        self._bootstrap: Replicates | None = None
        self._cache: dict[tuple[int, tuple[str, ...]], Responses] = {}
        self._stale = False   # a result arrived while the tab was hidden: drawn when shown
        self._plots: dict[str, pg.PlotItem] = {}
        self.points: dict[str, tuple[pg.ScatterPlotItem, pg.ScatterPlotItem]] = {}  # rises, falls
        self._looks: dict[str, tuple] = {}   # what each plot's title, axis and ticks show now
        self.band_edges: dict[str, tuple[pg.PlotDataItem, pg.PlotDataItem]] = {}
        self.rises: dict[str, pg.PlotDataItem] = {}
        self.falls: dict[str, pg.PlotDataItem] = {}
        self.half_marks: dict[str, tuple[pg.InfiniteLine, pg.TextItem]] = {}
        self._build_controls()
        self._build_body()

    # ----- building -----------------------------------------------------------------------
    def _build_controls(self) -> None:
        row = QHBoxLayout()
        row.setSpacing(6)
        self.shock_box = QComboBox()
        self.shock_box.setToolTip("The state that rises at prompt 0")
        self.units_box = _choices(UNITS, "Standardized: in standard deviations; own units: those of "
                                         "each state's marker item")
        self.form_box = _choices(FORMS, "Unit innovation: a rise in one state's innovation alone. "
                                        "Orthogonalised: innovations made uncorrelated in the order "
                                        "below (Cholesky factor)")
        self.horizon_spin = QSpinBox()
        self.horizon_spin.setRange(1, MAX_HORIZON)
        self.horizon_spin.setValue(DEFAULT_HORIZON)
        self.horizon_spin.setToolTip("How many prompts ahead to follow the responses")
        self.horizon_spin.setKeyboardTracking(False)
        self.cumulative_box = QCheckBox("Cumulative")
        self.cumulative_box.setToolTip("Sum of the responses from prompt 0 up to each prompt")
        for label, widget in (("Rise in", self.shock_box), ("Units", self.units_box),
                              ("Rise of", self.form_box), ("Prompts ahead", self.horizon_spin)):
            row.addWidget(QLabel(label))
            row.addWidget(widget)
            row.addSpacing(8)
        row.addWidget(self.cumulative_box)
        row.addStretch(1)
        self.body.addLayout(row)

        order_row = QHBoxLayout()
        order_row.setSpacing(6)
        self.order_label = QLabel("Order (earlier states move later ones at the same prompt)")
        self.order_list = QListWidget()
        self.order_list.setFlow(QListWidget.Flow.LeftToRight)
        self.order_list.setDragDropMode(QAbstractItemView.DragDropMode.InternalMove)
        self.order_list.setDefaultDropAction(Qt.DropAction.MoveAction)
        self.order_list.setToolTip("Drag the states, or select one and use the arrows, to change the order")
        self.order_list.setSpacing(3)
        self.order_list.setStyleSheet(f"QListWidget {{ background: transparent; border: none; }}"
                                      f"QListWidget::item {{ border: 1px solid {RULE}; border-radius: 4px;"
                                      f" padding: 1px 8px; background: #ffffff; }}"
                                      f"QListWidget::item:selected {{ border: 1px solid {POSITIVE}; color: {INK}; }}")
        self.order_list.setFixedHeight(self.order_list.fontMetrics().height() + 18)
        self.order_list.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.order_list.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Fixed)
        self.order_list.model().rowsMoved.connect(lambda *_: self._order_changed())
        self.earlier_button = _arrow("◀", "Move the selected state earlier in the order")
        self.later_button = _arrow("▶", "Move the selected state later in the order")
        self.earlier_button.clicked.connect(lambda: self._move_selected(-1))
        self.later_button.clicked.connect(lambda: self._move_selected(1))
        order_row.addWidget(self.order_label)
        order_row.addWidget(self.earlier_button)
        order_row.addWidget(self.later_button)
        order_row.addWidget(self.order_list, 1)
        self.order_row = QWidget()
        self.order_row.setLayout(order_row)
        order_row.setContentsMargins(0, 0, 0, 0)
        self.order_row.setVisible(False)
        self.body.addWidget(self.order_row)

        self.shock_box.currentIndexChanged.connect(self._redraw)
        self.units_box.currentIndexChanged.connect(self._redraw)
        self.form_box.currentIndexChanged.connect(self._form_changed)
        self.cumulative_box.toggled.connect(self._redraw)
        self.horizon_spin.valueChanged.connect(self._recompute)
        for signal in (self.units_box.currentIndexChanged, self.form_box.currentIndexChanged,
                       self.cumulative_box.toggled, self.horizon_spin.valueChanged,
                       self.order_list.model().rowsMoved):
            signal.connect(lambda *_: self.choice_changed.emit())

    def _build_body(self) -> None:
        self.legend = QLabel()
        self.legend.setTextFormat(Qt.TextFormat.RichText)
        self.plots = pg.GraphicsLayoutWidget()
        self.plots.setObjectName("responsePlots")
        self.plots.setBackground("w")
        self.plots.ci.setSpacing(4)
        self.plot_scroll = QScrollArea()
        self.plot_scroll.setWidgetResizable(True)
        self.plot_scroll.setFrameShape(QScrollArea.Shape.NoFrame)
        self.plot_scroll.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.plot_scroll.setWidget(self.plots)
        plots_page = QWidget()
        column = QVBoxLayout(plots_page)
        column.setContentsMargins(4, 4, 4, 0)
        column.addWidget(self.legend)
        column.addWidget(self.plot_scroll, 1)
        self.numbers = RecordsModel(NUMBER_COLUMNS, parent=self)
        self.numbers_view = table_view(self.numbers)
        self.all_numbers = RecordsModel(ALL_COLUMNS, parent=self)   # exported, every rise
        self.views = QTabWidget()
        self.views.setDocumentMode(True)
        self.views.addTab(plots_page, "Plots")
        self.views.addTab(self.numbers_view, "Numbers")

        self.explain = note_label()
        self.words = QLabel()
        self.words.setObjectName("responseSentences")
        self.words.setWordWrap(True)
        self.words.setTextFormat(Qt.TextFormat.RichText)
        self.words.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.half_lives = RecordsModel(HALF_LIFE_COLUMNS, parent=self)
        self.half_view = table_view(self.half_lives, stretch_last=True)
        self.half_view.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.half_view.setVerticalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.notes = note_label()
        self.notes.setObjectName("responseNotes")
        side = QWidget()
        text = QVBoxLayout(side)
        text.setContentsMargins(4, 4, 8, 4)
        text.addWidget(_wrapped(section_label("What the plots show")))
        text.addWidget(self.explain)
        text.addSpacing(4)
        text.addWidget(_wrapped(section_label("In words (unit innovations, one prompt later)")))
        text.addWidget(self.words)
        text.addSpacing(4)
        text.addWidget(_wrapped(section_label("Half-life: prompts until a state's own rise has halved")))
        text.addWidget(self.half_view)
        text.addSpacing(4)
        text.addWidget(self.notes)
        text.addStretch(1)
        self.side = QScrollArea()
        self.side.setWidgetResizable(True)
        self.side.setFrameShape(QScrollArea.Shape.NoFrame)
        self.side.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.side.setWidget(side)

        split = QSplitter(Qt.Orientation.Horizontal)
        split.addWidget(self.views)
        split.addWidget(self.side)
        split.setStretchFactor(0, 2)
        split.setStretchFactor(1, 1)
        split.setSizes([740, 360])
        split.setChildrenCollapsible(False)
        self.split = split
        self.body.addWidget(split, 1)

    # ----- feeding ------------------------------------------------------------------------
    def show_result(self, result: FitResult) -> None:
        self._result = result
        self._cache = {}
        states = list(result.states)
        if [self.shock_box.itemText(i) for i in range(self.shock_box.count())] != states:
            for widget in (self.shock_box, self.order_list):
                widget.blockSignals(True)
            self.shock_box.clear()
            self.shock_box.addItems(states)
            self.order_list.clear()
            for state in states:
                self.order_list.addItem(QListWidgetItem(state))
            for widget in (self.shock_box, self.order_list):
                widget.blockSignals(False)
            self._build_plots(states)
        self._stale = not self.isVisible()
        if not self._stale:
            self._recompute()

    def showEvent(self, event) -> None:
        super().showEvent(event)
        if self._stale:
            self._stale = False
            self._recompute()

    def set_bootstrap(self, replicates: Replicates | None) -> None:
        """Bootstrap replicates of the shown result's free parameters: percentile bands."""
        self._bootstrap = replicates
        self._cache = {}
        if self._result is not None:
            self._recompute()

    def response_choice(self) -> ResponseChoice:
        """What the tab shows now (saved with the project)."""
        form, cumulative, standardized = self.choice()
        return ResponseChoice(self.horizon_spin.value(), self.order, form, cumulative,
                              standardized)

    def set_response_choice(self, choice: ResponseChoice) -> None:
        """Show `choice` (a reopened project's); an order of other states is left alone."""
        widgets = (self.horizon_spin, self.units_box, self.form_box, self.cumulative_box)
        for widget in widgets:
            widget.blockSignals(True)
        self.horizon_spin.setValue(choice.horizon)
        self.units_box.setCurrentIndex(self.units_box.findData(
            "standardized" if choice.standardized else "own"))
        self.form_box.setCurrentIndex(self.form_box.findData(choice.form))
        self.cumulative_box.setChecked(choice.cumulative)
        for widget in widgets:
            widget.blockSignals(False)
        self.order_row.setVisible(choice.form == "orthogonal")
        if choice.order and sorted(choice.order) == sorted(self.order):
            self.set_order(choice.order)
        elif self._result is not None:
            self._recompute()

    @property
    def order(self) -> tuple[str, ...]:
        return tuple(self.order_list.item(n).text() for n in range(self.order_list.count()))

    def set_order(self, order) -> None:
        """Put the states in `order` (as dragging them would)."""
        self.order_list.blockSignals(True)
        self.order_list.clear()
        for state in order:
            self.order_list.addItem(QListWidgetItem(state))
        self.order_list.blockSignals(False)
        self._order_changed()

    @property
    def responses(self) -> Responses | None:
        """The Responses object everything on the tab is read from."""
        if self._result is None:
            return None
        key = (self.horizon_spin.value(), self.order)
        if key not in self._cache:
            self._cache[key] = impulse_responses(self._result, key[0], key[1], self._bootstrap)
        return self._cache[key]

    def choice(self) -> tuple[str, bool, bool]:
        """(form, cumulative, standardized) as switched on the tab."""
        return (self.form_box.currentData(), self.cumulative_box.isChecked(),
                self.units_box.currentData() == "standardized")

    # ----- reacting -----------------------------------------------------------------------
    def _form_changed(self) -> None:
        self.order_row.setVisible(self.form_box.currentData() == "orthogonal")
        self._redraw()

    def _order_changed(self) -> None:
        if self._result is not None:
            self._recompute()

    def _move_selected(self, step: int) -> None:
        row = self.order_list.currentRow()
        target = row + step
        if row < 0 or not 0 <= target < self.order_list.count():
            return
        order = list(self.order)
        order.insert(target, order.pop(row))
        self.set_order(order)
        self.order_list.setCurrentRow(target)
        self.choice_changed.emit()

    def _recompute(self) -> None:
        responses = self.responses
        if responses is None:
            return
        self._enable(responses)
        self.half_lives.set_rows([HalfLife(responses, i) for i in range(len(responses.states))])
        self.half_view.resizeColumnsToContents()
        fit_height(self.half_view)
        self._redraw()

    def _enable(self, responses: Responses) -> None:
        """Offer standardized and orthogonal responses only when the fit has them."""
        for box, key, available in ((self.units_box, "standardized", responses.standardized_available),
                                    (self.form_box, "orthogonal", responses.orthogonal_available)):
            item = box.model().item(box.findData(key))
            item.setEnabled(available)
            if not available and box.currentData() == key:
                box.setCurrentIndex(1 - box.findData(key))

    def _redraw(self) -> None:
        responses = self.responses
        if responses is None or self.shock_box.currentIndex() < 0:
            return
        form, cumulative, standardized = self.choice()
        standardized = standardized and responses.standardized_available
        curve = responses.curve(form, cumulative, standardized)
        j = self.shock_box.currentIndex()
        shock = responses.states[j]
        x = np.arange(responses.horizon + 1, dtype=float)
        shown = np.concatenate([curve.estimate[:, :, j].ravel()] + [
            part[:, :, j].ravel() for part in (curve.lower, curve.upper) if part is not None])
        span = float(np.nanmax(np.abs(shown))) if np.any(np.isfinite(shown)) else 1.0
        for i, state in enumerate(responses.states):
            low = None if curve.lower is None else curve.lower[:, i, j]
            high = None if curve.upper is None else curve.upper[:, i, j]
            half = responses.half_life[i] if i == j and not cumulative and form == "unit" else None
            self._draw(state, x, curve.estimate[:, i, j], low, high, half, state == shock, span,
                       "SD" if standardized else "own units")
        rows = [Number(responses, curve, h, i, j) for i in range(len(responses.states))
                for h in range(responses.horizon + 1)]
        self.numbers.set_rows(rows)
        self.all_numbers.set_rows([Number(responses, curve, h, i, s) for s in range(len(responses.states))
                                   for i in range(len(responses.states))
                                   for h in range(responses.horizon + 1)])
        self._update_legend(responses)
        _set_text(self.explain, plain(EXPLAIN[(form, "standardized" if standardized else "own")]
                                      .format(shock=shock) + (CUMULATIVE if cumulative else "")))
        sentences = responses.sentences(standardized)
        _set_text(self.words, "<br>".join((f"<b>{html.escape(s)}</b>" if n == j else html.escape(s))
                                          for n, s in enumerate(sentences)))
        _set_text(self.notes, " ".join(note for note in responses.notes
                                       if form == "orthogonal" or "Orthogonal" not in note))

    # ----- the plots ----------------------------------------------------------------------
    def _build_plots(self, states: list[str]) -> None:
        self.plots.clear()
        self._plots, self.points, self.band_edges, self._looks = {}, {}, {}, {}
        self.rises, self.falls, self.half_marks = {}, {}, {}
        columns = min(COLUMNS_OF_PLOTS, len(states))
        rows = math.ceil(len(states) / columns)
        self.plots.setMinimumHeight(rows * ROW_HEIGHT)
        font = QFont()
        font.setPointSizeF(8.5)
        for n, state in enumerate(states):
            plot = self.plots.addPlot(row=n // columns, col=n % columns)
            style_plot(plot, html.escape(state))
            plot.getAxis("left").setWidth(52)
            plot.getAxis("bottom").setStyle(hideOverlappingLabels=False)   # keep the last prompt
            plot.addItem(pg.InfiniteLine(pos=0, angle=0, pen=pg.mkPen(RULE, width=1)))
            lower = pg.PlotDataItem(pen=pg.mkPen(None))
            upper = pg.PlotDataItem(pen=pg.mkPen(None))
            fill = QColor(BAND)
            fill.setAlphaF(BAND_ALPHA)
            band = pg.FillBetweenItem(lower, upper, brush=pg.mkBrush(fill))
            band.setZValue(-5)
            plot.addItem(lower)
            plot.addItem(upper)
            plot.addItem(band)
            rise = pg.PlotDataItem(pen=pg.mkPen(POSITIVE, width=2.2), connect="finite")
            fall = pg.PlotDataItem(pen=pg.mkPen(NEGATIVE, width=2.2, style=Qt.PenStyle.DashLine),
                                   connect="finite")
            points = (pg.ScatterPlotItem(size=6, pen=None, symbol="o", brush=pg.mkBrush(POSITIVE)),
                      pg.ScatterPlotItem(size=7, pen=None, symbol="d", brush=pg.mkBrush(NEGATIVE)))
            for item in (rise, fall, *points):
                item.setZValue(5)
                plot.addItem(item)
            mark = pg.InfiniteLine(angle=90, pen=pg.mkPen(MUTED, width=1, style=Qt.PenStyle.DotLine))
            label = pg.TextItem(color=MUTED, anchor=(0, 0))
            label.setFont(font)
            plot.addItem(mark)
            plot.addItem(label)
            self._plots[state] = plot
            self.points[state], self.band_edges[state] = points, (lower, upper)
            self.rises[state], self.falls[state], self.half_marks[state] = rise, fall, (mark, label)
            if n // columns == rows - 1 or n + columns >= len(states):
                plot.setLabel("bottom", "prompts after the rise", color=INK)

    def _draw(self, state: str, x: np.ndarray, y: np.ndarray, low, high, half: int | None,
              itself: bool, span: float, units: str) -> None:
        plot = self._plots[state]
        look = (itself, units, len(x))
        if self._looks.get(state) != look:   # restyling costs more than the data: only on change
            self._looks[state] = look
            title = html.escape(state) + (" (itself)" if itself else "")
            plot.setTitle(f"<span style='color:{INK}; font-weight:600'>{title}</span>")
            # no SI prefix ranges: pyqtgraph would otherwise show values below 1 in thousandths
            plot.getAxis("left").setLabel(units, siPrefixEnableRanges=(), color=INK)
            step = max(1, math.ceil(x[-1] / 5))
            plot.getAxis("bottom").setTicks([[(float(h), str(h)) for h in range(0, int(x[-1]) + 1, step)], []])
            plot.setXRange(-0.6, x[-1] + 0.6, padding=0)
        lower, upper = self.band_edges[state]
        has_band = low is not None and np.all(np.isfinite(low)) and np.all(np.isfinite(high))
        lower.setData(x, low if has_band else y)
        upper.setData(x, high if has_band else y)
        rising, falling = _signed_pieces(x, y)
        self.rises[state].setData(*rising)
        self.falls[state].setData(*falling)
        finite = np.isfinite(y)
        up = finite & (y >= 0)
        down = finite & (y < 0)
        self.points[state][0].setData(x[up], y[up])
        self.points[state][1].setData(x[down], y[down])
        values = np.concatenate([y[finite], [0.0]] + ([low, high] if has_band else []))
        top, bottom = float(np.max(values)), float(np.min(values))
        if top - bottom < 0.2 * span:   # a flat response: a tenth of the largest one either side
            middle = 0.5 * (top + bottom)
            top, bottom = middle + 0.1 * span, middle - 0.1 * span
        pad = 0.12 * max(top - bottom, 1e-9)
        plot.setYRange(bottom - pad, top + pad, padding=0)
        mark, label = self.half_marks[state]
        mark.setVisible(half is not None)
        label.setVisible(half is not None)
        if half is not None:
            mark.setValue(half)
            label.setText(f"half-life {half}")
            label.setPos(half, top + pad)

    def _update_legend(self, responses: Responses) -> None:
        band = INTERVAL_WORDS[responses.interval]
        parts = [f"<span style='color:{POSITIVE}; font-weight:700'>━━ ●</span> rise",
                 f"<span style='color:{NEGATIVE}; font-weight:700'>╍╍ ◆</span> fall"]
        if band:
            parts.append(f"<span style='background-color:{BAND_SWATCH}'>&nbsp;&nbsp;&nbsp;&nbsp;</span> "
                         f"{responses.level * 100:g}% band ({band})")
        parts.append(f"<span style='color:{MUTED}'>each plot has its own scale</span>")
        _set_text(self.legend, "&nbsp;&nbsp;&nbsp;".join(parts))

    # ----- export -------------------------------------------------------------------------
    def pictures(self) -> dict:
        return {"responses": self.plots} if self._result is not None else {}

    def tables(self) -> dict:
        if self._result is None:
            return {}
        return {"plotted responses": self.numbers, "responses to every rise": self.all_numbers,
                "half-lives": self.half_lives}


def _signed_pieces(x: np.ndarray, y: np.ndarray) -> tuple[tuple[np.ndarray, np.ndarray], ...]:
    """The line through (x, y) cut where it crosses 0: (x, y) of its parts at or above 0 and of
    its parts below 0, each with NaN between separate parts."""
    pieces = {True: ([], []), False: ([], [])}
    for h in range(len(x) - 1):
        a, b = y[h], y[h + 1]
        if not (np.isfinite(a) and np.isfinite(b)):
            continue
        if (a >= 0) == (b >= 0):
            spans = [((x[h], a), (x[h + 1], b), a >= 0)]
        else:
            cross = x[h] + a / (a - b) * (x[h + 1] - x[h])
            spans = [((x[h], a), (cross, 0.0), a >= 0), ((cross, 0.0), (x[h + 1], b), b >= 0)]
        for start, end, positive in spans:
            xs, ys = pieces[positive]
            xs += [start[0], end[0], np.nan]
            ys += [start[1], end[1], np.nan]
    return tuple((np.array(pieces[s][0], dtype=float), np.array(pieces[s][1], dtype=float))
                 for s in (True, False))


def _set_text(label: QLabel, text: str) -> None:
    """Set a label's text only when it changes (a wrapped label relays out its column)."""
    if label.text() != text:
        label.setText(text)


def _wrapped(label: QLabel) -> QLabel:
    label.setWordWrap(True)
    return label


def _choices(options: dict[str, str], tip: str) -> QComboBox:
    box = QComboBox()
    for key, words in options.items():
        box.addItem(words, key)
    box.setToolTip(tip)
    return box


def _arrow(text: str, tip: str) -> QToolButton:
    button = QToolButton()
    button.setText(text)
    button.setToolTip(tip)
    button.setAccessibleName(tip)
    return button


# ----- the tables ----------------------------------------------------------------------------
class Number:
    """One plotted value: the response of state i, h prompts after a rise in state j."""

    def __init__(self, responses: Responses, curve, h: int, i: int, j: int):
        self.h, self.shock, self.state = h, responses.states[j], responses.states[i]
        self.estimate = curve.estimate[h, i, j]
        self.se = None if curve.se is None else curve.se[h, i, j]
        self.lower = None if curve.lower is None else curve.lower[h, i, j]
        self.upper = None if curve.upper is None else curve.upper[h, i, j]


NUMBER_COLUMNS = (
    Column("Prompts after", lambda r: r.h, "int"),
    Column("State", lambda r: r.state, "text", tip="The responding state"),
    Column("Response", lambda r: r.estimate),
    Column("SE", lambda r: r.se, tip="Standard error by the delta method (approximate)"),
    Column("Band low", lambda r: r.lower, tip="Lower end of the band"),
    Column("Band high", lambda r: r.upper, tip="Upper end of the band"),
)
ALL_COLUMNS = (Column("Rise in", lambda r: r.shock, "text"),) + NUMBER_COLUMNS


class HalfLife:
    """One state's half-life row."""

    def __init__(self, responses: Responses, i: int):
        self.state = responses.states[i]
        half = responses.half_life[i]
        self.half = str(half) if half is not None else f"more than {responses.horizon}"
        self.next = responses.unit[1, i, i]
        self.swings = "yes" if responses.oscillates[i] else "no"


HALF_LIFE_COLUMNS = (
    Column("State", lambda r: r.state, "text"),
    Column("Half-life", lambda r: r.half, "text",
           tip="Prompts until the state's own response first falls below half of its rise"),
    Column("1 prompt later", lambda r: r.next,
           tip="The state's own response one prompt after a rise of 1 (the same in standardized units)"),
    Column("Swings", lambda r: r.swings, "text", tip="Does the own response swing between rises and falls?"),
)
