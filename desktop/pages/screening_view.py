"""The screening view: is the diary ready for a model, and what preparation would help?

Shows, for a diary, the readiness summary (answered prompts, complete lag windows, windows
per free parameter, compliance by week, warnings in plain words), a table of per-item
screening figures (models.screening) and, for the selected item, its series with the
linear trend, its autocorrelations, and its within-day and weekday profiles, as answered
and after the chosen preparation steps (models.preparation). Ticking a step emits
`steps_changed(tuple_of_steps)`; the owner records the steps and may call `set_diary` again.
Every picture can be saved as PNG/SVG and every table as CSV. No statistics here.
Every diary is screened in a worker thread (desktop.worker) with its progress shown, so the
window stays responsive; the result arrives through `_show`. The item table shows every
item (up to MAX_ITEM_ROWS without scrolling); each Notes cell holds the full sentences in its
tooltip, and a KPSS p at the edge of its table is explained in a sentence below the table.
"""

from __future__ import annotations

from html import escape

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QAbstractTableModel, QModelIndex, Qt, QTimer, Signal
from PySide6.QtGui import QColor, QStandardItem, QStandardItemModel
from PySide6.QtWidgets import (
    QAbstractItemView, QCheckBox, QGroupBox, QHBoxLayout, QHeaderView, QLabel, QScrollArea,
    QSplitter, QTableView, QToolButton, QVBoxLayout, QWidget,
)

from lagwise.desktop import style
from lagwise.desktop.export import export_menu
from lagwise.desktop.worker import Worker
from lagwise.models.diary import Diary
from lagwise.models.errors import DataError
from lagwise.models.preparation import STEP_LABELS, STEP_NAMES, Step, apply_steps, describe, usual_order
from lagwise.models.numbers import fmt, p_phrase
from lagwise.models.screening import (
    ItemScreen, Profile, Screening, item_findings, screen_diary, weekdays,
)

PLOT_ROW_HEIGHT = 190   # pixels per row of item plots
MAX_ITEM_ROWS = 15       # items the item table shows without scrolling
MAX_DAY_TICKS = 6
PLOT_ROWS = ("series", "acf", "within_day", "weekday")
ITEM_COLUMNS = ("Item", "Notes", "Answered", "Missed %", "Mean", "SD", "Floor %", "Ceiling %",
                "Skew", "ACF 1", "Trend", "Trend p", "ADF p", "KPSS p", "Reading")
TREND_PEN = dict(color=style.INK, width=2, style=Qt.PenStyle.DashLine)
BEFORE = style.SERIES[1]   # slate blue: as answered
AFTER = style.SERIES[0]    # deep teal: after preparation


class ScreeningView(QWidget):
    """Screening of a diary with before/after views of the preparation steps."""

    steps_changed = Signal(tuple)

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("screeningView")
        self._diary: Diary | None = None
        self._prepared: Diary | None = None
        self._steps: tuple[Step, ...] = ()
        self._n_free: int | None = None
        self._scales: dict | None = None
        self._before: Screening | None = None
        self._after: Screening | None = None
        self._item = 0
        self._records: list[list[str]] = []
        self._export_buttons: dict[str, QToolButton] = {}
        self._worker = Worker(self)
        self._drawing = None  # the plot steps still to draw (see `_draw_item`)
        self._draw_timer = QTimer(self)
        self._draw_timer.setInterval(0)
        self._draw_timer.timeout.connect(self._draw_next)
        self._build()
        self._worker.started.connect(self.progress_label.show)
        self._worker.progress.connect(
            lambda fraction, message: self.progress_label.setText(
                f"{escape(message)} ({fraction:.0%})"))  # the message may quote an item name
        self._worker.done.connect(self._show)
        self._worker.error.connect(lambda message, _details: self.progress_label.setText(
            f"<span style='color:{style.WARNING}'>⚠ {escape(message)}</span>"))
        self._worker.cancelled.connect(lambda _message: self.progress_label.hide())
        self._show_empty()

    # ----- public --------------------------------------------------------------------
    def set_diary(self, diary: Diary | None, steps=(), n_free: int | None = None,
                  scales: dict[str, tuple[float, float]] | None = None) -> None:
        """Screen `diary` as answered and after `steps`; n_free: free parameters of the
        current specification (None: unknown); scales: item -> (low, high) of its scale."""
        steps = tuple(steps)
        same_data = (diary is self._diary and n_free == self._n_free and scales == self._scales)
        if same_data and steps == self._steps and diary is not None:
            return
        self._n_free, self._scales = n_free, scales
        if not same_data or self._before is None:
            self._diary, self._before = diary, None
            self._item = min(self._item, diary.n_items - 1) if diary is not None else 0
        self._set_checks(steps)
        self._steps = steps
        self._prepare()
        self._screen()

    @property
    def busy(self) -> bool:
        """The diary is being screened in the worker, or its plots drawn."""
        return self._worker.busy or self._drawing is not None

    def steps(self) -> tuple[Step, ...]:
        """The preparation steps currently chosen."""
        return self._steps

    def screening(self, prepared: bool = False) -> Screening | None:
        """The screening as answered, or after the preparation steps (None if none)."""
        return self._after if prepared else self._before

    def select_item(self, name: str) -> None:
        """Show the plots of item `name`."""
        if self._diary is None or name not in self._diary.items:
            return
        self._item = self._diary.items.index(name)
        self._select_row()
        self._draw_item()

    # ----- building ------------------------------------------------------------------
    def _build(self) -> None:
        layout = QVBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)

        prep = QGroupBox("Preparation before estimation")
        prep_layout = QVBoxLayout(prep)
        checks_row = QHBoxLayout()
        self.checks: dict[str, QCheckBox] = {}
        for name in STEP_NAMES:
            box = QCheckBox(STEP_LABELS[name])
            box.setObjectName(f"step_{name}")
            box.toggled.connect(self._on_toggled)
            self.checks[name] = box
            checks_row.addWidget(box)
        checks_row.addStretch(1)
        prep_layout.addLayout(checks_row)
        self.steps_label = QLabel()
        self.steps_label.setObjectName("stepsLabel")
        self.steps_label.setWordWrap(True)
        prep_layout.addWidget(self.steps_label)
        layout.addWidget(prep)

        splitter = QSplitter(Qt.Orientation.Horizontal)
        left = QWidget()
        left_layout = QVBoxLayout(left)
        left_layout.setContentsMargins(0, 0, 6, 0)
        left_layout.addWidget(QLabel("<b>Readiness</b>"))
        self.readiness_label = QLabel()
        self.readiness_label.setObjectName("readinessLabel")
        self.readiness_label.setWordWrap(True)
        self.readiness_label.setAlignment(Qt.AlignmentFlag.AlignTop | Qt.AlignmentFlag.AlignLeft)
        self.readiness_label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        readiness_scroll = QScrollArea()
        readiness_scroll.setWidgetResizable(True)
        readiness_scroll.setFrameShape(QScrollArea.Shape.NoFrame)
        readiness_scroll.setWidget(self.readiness_label)
        left_layout.addWidget(readiness_scroll, 3)
        left_layout.addLayout(self._caption("Answered prompts by week", "weeks"))
        self.week_model = QStandardItemModel(self)
        self.week_table = self._table(self.week_model, "weekTable")
        self.week_table.horizontalHeader().setSectionResizeMode(
            QHeaderView.ResizeMode.ResizeToContents)
        self.week_table.horizontalHeader().setStretchLastSection(True)
        left_layout.addWidget(self.week_table, 2)
        splitter.addWidget(left)

        right = QSplitter(Qt.Orientation.Vertical)
        top = QWidget()
        top_layout = QVBoxLayout(top)
        top_layout.setContentsMargins(0, 0, 0, 0)
        top_layout.addLayout(self._caption("Items as answered (select one to see its plots)",
                                           "items"))
        self.item_model = QStandardItemModel(self)
        self.item_table = self._table(self.item_model, "itemScreenTable")
        self.item_table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.item_table.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.item_table.horizontalHeader().setSectionResizeMode(
            QHeaderView.ResizeMode.ResizeToContents)
        self.item_table.horizontalHeader().setStretchLastSection(True)
        self.item_table.selectionModel().currentRowChanged.connect(self._on_row)
        self.item_table.verticalHeader().setDefaultSectionSize(
            self.item_table.fontMetrics().height() + 8)  # compact rows: every item in view
        top_layout.addWidget(self.item_table, 1)
        self.edge_label = QLabel()
        self.edge_label.setObjectName("kpssEdgeNote")
        self.edge_label.setWordWrap(True)
        self.edge_label.setTextFormat(Qt.TextFormat.PlainText)  # it quotes item names
        self.edge_label.setStyleSheet(f"color: {style.MUTED};")
        self.edge_label.setMinimumHeight(2 * self.edge_label.fontMetrics().lineSpacing() + 4)
        self.edge_label.hide()
        top_layout.addWidget(self.edge_label)
        right.addWidget(top)

        bottom = QWidget()
        bottom_layout = QVBoxLayout(bottom)
        bottom_layout.setContentsMargins(0, 0, 0, 0)
        self.plot_caption = QLabel()
        bottom_layout.addLayout(self._caption("", "plots", self.plot_caption))
        self.plots = pg.GraphicsLayoutWidget()
        self.plots.setObjectName("screeningPlots")
        self.plots.setBackground(style.PAPER)
        self.plots.ci.setSpacing(4)
        for col in (0, 1):
            self.plots.ci.layout.setColumnStretchFactor(col, 1)
        self.plots.setMinimumHeight(4 * PLOT_ROW_HEIGHT + 30)
        self._headers = [pg.LabelItem(size="10pt") for _ in range(2)]
        self._grid = [{key: self._new_plot() for key in PLOT_ROWS} for _ in range(2)]
        self._hint = pg.LabelItem("Tick a preparation step above<br>to compare before and after.",
                                  color=style.MUTED, size="9pt")
        self._shown_columns = 0
        self.progress_label = QLabel()
        self.progress_label.setObjectName("screeningProgress")
        self.progress_label.setTextFormat(Qt.TextFormat.RichText)
        keep = self.progress_label.sizePolicy()
        keep.setRetainSizeWhenHidden(True)  # showing it moves no plot (a repaint of them all)
        self.progress_label.setSizePolicy(keep)
        self.progress_label.hide()
        bottom_layout.addWidget(self.progress_label)
        self.plot_scroll = QScrollArea()
        self.plot_scroll.setWidgetResizable(True)
        self.plot_scroll.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.plot_scroll.setWidget(self.plots)
        bottom_layout.addWidget(self.plot_scroll, 1)
        self.plot_model = RowsModel(["Plot", "Version", "Position", "Label", "Value", "Count"],
                                    self)
        right.addWidget(bottom)
        right.setSizes([230, 600])
        splitter.addWidget(right)
        splitter.setSizes([360, 1000])
        layout.addWidget(splitter, 1)

        self._export_buttons["weeks"].setMenu(export_menu(self, None, self.week_model,
                                                          "answered-by-week"))
        self._export_buttons["items"].setMenu(export_menu(self, self.item_table, self.item_model,
                                                          "item-screening"))
        self._export_buttons["plots"].setMenu(export_menu(self, self.plots, self.plot_model,
                                                          "item-plots"))

    def _caption(self, text: str, key: str, label: QLabel | None = None) -> QHBoxLayout:
        row = QHBoxLayout()
        label = label or QLabel(f"<b>{text}</b>")
        button = QToolButton()
        button.setText("Export")
        button.setPopupMode(QToolButton.ToolButtonPopupMode.InstantPopup)
        button.setAccessibleName(f"Export {key}")
        self._export_buttons[key] = button
        row.addWidget(label, 1)
        row.addWidget(button)
        return row

    def _table(self, model: QStandardItemModel, name: str) -> QTableView:
        table = QTableView()
        table.setObjectName(name)
        table.setModel(model)
        table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        table.verticalHeader().setVisible(False)
        table.setAlternatingRowColors(True)
        table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Stretch)
        return table

    # ----- steps ---------------------------------------------------------------------
    def _set_checks(self, steps: tuple[Step, ...]) -> None:
        chosen = {s.name for s in steps}
        diary = self._diary
        possible = {
            "prompt_means": diary is not None and not np.isnan(diary.prompt).any(),
            "weekday_means": diary is not None and weekdays(diary) is not None,
        }
        why = {
            "prompt_means": "The diary has no prompt numbers (import it with a prompt column).",
            "weekday_means": "The days are not dates and the diary has no timestamps.",
        }
        for name, box in self.checks.items():
            box.blockSignals(True)
            box.setChecked(name in chosen)
            ok = diary is not None and possible.get(name, True)
            box.setEnabled(ok or name in chosen)
            box.setToolTip("" if ok else why.get(name, ""))
            box.blockSignals(False)

    def _on_toggled(self) -> None:
        chosen = {name for name, box in self.checks.items() if box.isChecked()}
        kept = tuple(s for s in self._steps if s.name in chosen)
        added = tuple(Step(name) for name in STEP_NAMES
                      if name in chosen and name not in {s.name for s in kept})
        steps = usual_order(kept + added)
        previous = self._steps
        self._steps = steps
        if not self._prepare():
            refusal = self.steps_label.text()
            self._steps = previous
            self._set_checks(previous)
            self._prepare()
            self._screen()
            self.steps_label.setText(refusal)
            return
        self._screen()
        self.steps_changed.emit(steps)

    def _prepare(self) -> bool:
        """Apply the steps; False (with the reason shown) when they cannot be applied."""
        self._prepared, self._after = None, None
        if self._diary is None or not self._steps:
            self.steps_label.setText("No preparation: the model uses the answers as given.")
            return True
        try:
            self._prepared = apply_steps(self._diary, self._steps)
        except DataError as error:
            self.steps_label.setText(f"<span style='color:{style.WARNING}'>⚠ Not applied: "
                                     f"{escape(str(error))}</span>")
            return False
        self.steps_label.setText("Applied in this order before estimation: "
                                 f"{escape(describe(self._steps))}.")
        return True

    # ----- screening -----------------------------------------------------------------
    def _screen(self) -> None:
        """Screen the diary (unless already done) and the prepared diary in the worker; they
        are shown when they arrive."""
        job = (self._diary, self._before, self._prepared, self._scales, self._n_free)
        if self._diary is None:
            self._worker.cancel()
            self._show(screen_versions(*job))
            return
        self.progress_label.setText("Screening…")
        if self._before is None:
            self.readiness_label.setText("Screening the diary…")
        self._worker.start(screen_versions, *job, job="screening")

    def _show(self, screened: tuple) -> None:
        """Show the screenings of `screen_versions` if they belong to the current diary."""
        diary, prepared, before, after = screened
        if diary is not self._diary or prepared is not self._prepared:
            return  # a run for inputs that have changed since
        self.progress_label.hide()
        self._before, self._after = before, after
        self._refresh()

    # ----- drawing -------------------------------------------------------------------
    def _show_empty(self) -> None:
        self.readiness_label.setText("No diary yet: import a data file to screen it.")
        self.steps_label.setText("")
        for box in self.checks.values():
            box.setEnabled(False)

    def _refresh(self) -> None:
        self._fill_readiness()
        self._fill_weeks()
        self._fill_items()
        self._draw_item()

    def _fill_readiness(self) -> None:
        if self._before is None:
            self._show_empty()
            return
        r = self._before.readiness
        share = f" ({100 * r.answered / r.occasions:.0f}%)" if r.occasions else ""
        lines = [f"<b>{r.answered}</b> of {r.occasions} prompts answered{share}.",
                 f"<b>{r.complete_windows}</b> complete lag windows (two consecutive prompts in "
                 f"one segment, every item answered); {r.partial_windows} more with a missing "
                 "value."]
        if r.windows_per_parameter is not None:
            lines.append(f"<b>{r.windows_per_parameter:.1f}</b> complete windows per free "
                         f"parameter ({r.n_free} free parameters in the current model).")
        else:
            lines.append("Windows per free parameter: specify a model to see this.")
        html = "<p>" + "<br>".join(lines) + "</p>"
        if r.warnings:
            html += "".join(f"<p style='color:{style.WARNING}; margin:4px 0'>⚠ {escape(w)}</p>"
                            for w in r.warnings)
        else:
            html += f"<p style='color:{style.NOTE}'>No warnings.</p>"
        html += f"<p style='color:{style.MUTED}'><i>{escape(r.caution)}</i></p>"
        self.readiness_label.setText(html)

    def _fill_weeks(self) -> None:
        model = self.week_model
        model.clear()
        model.setHorizontalHeaderLabels(["Week", "Days", "Answered", "Scheduled", "%"])
        if self._before is None:
            return
        for w in self._before.readiness.compliance_by_week:
            first, last = _short_day(w.first_day), _short_day(w.last_day)
            days = first if first == last else f"{first} – {last}"
            pct = "—" if w.fraction is None else f"{100 * w.fraction:.0f}"
            model.appendRow(_row([str(w.week), days, str(w.answered), str(w.scheduled), pct]))

    def _fill_items(self) -> None:
        model = self.item_model
        self.item_table.selectionModel().blockSignals(True)  # refilling keeps the selection
        model.clear()
        headers = list(ITEM_COLUMNS)
        if self._after is not None:
            headers.append("Reading after")
        model.setHorizontalHeaderLabels(headers)
        for j, s in enumerate(() if self._before is None else self._before.items):
            total = s.answered + s.missing
            cells = [s.name, ", ".join(s.flags), str(s.answered),
                     _fixed(100 * s.missing / total if total else None, 0),
                     _fixed(s.mean), _fixed(s.sd), _fixed(_pct(s.floor_share), 0),
                     _fixed(_pct(s.ceiling_share), 0), _fixed(s.skewness),
                     _fixed(s.acf[0] if s.acf else None), _fixed(s.trend.slope, 4),
                     fmt(s.trend.p, "p"), fmt(s.adf.p, "p"),
                     fmt(s.kpss.p, "p") + (" (edge)" if s.kpss.p_bounded else ""), s.reading]
            if self._after is not None:
                cells.append(self._after.items[j].reading)
            row = _row(cells)
            row[0].setToolTip(style.plain(f"ADF: {s.adf.verdict}\nKPSS: {s.kpss.verdict}"))
            row[ITEM_COLUMNS.index("KPSS p")].setToolTip(style.plain(s.kpss.edge_sentence or ""))
            row[1].setToolTip(style.plain("\n".join(text for _, text in item_findings(s))))
            if s.flags:
                row[1].setForeground(QColor(style.WARNING))
            model.appendRow(row)
        self._select_row()
        self.item_table.selectionModel().blockSignals(False)
        self._fit_item_rows()
        self._explain_edges()

    def _fit_item_rows(self) -> None:
        """Make the item table tall enough for every item (up to MAX_ITEM_ROWS)."""
        table = self.item_table
        rows = min(self.item_model.rowCount(), MAX_ITEM_ROWS)
        table.setMinimumHeight(table.horizontalHeader().sizeHint().height()
                               + rows * table.verticalHeader().defaultSectionSize()
                               + 2 * table.frameWidth()
                               + table.horizontalScrollBar().sizeHint().height())

    def _explain_edges(self) -> None:
        """One sentence per side for the items whose KPSS p is at the edge of its table."""
        items: dict[str, list[str]] = {}
        for s in self._before.items if self._before is not None else ():
            if s.kpss.edge_sentence:
                items.setdefault(s.kpss.edge_sentence, []).append(s.name)
        self.edge_label.setText("\n".join(f"KPSS p marked (edge), {', '.join(names)}: {sentence}"
                                          for sentence, names in items.items()))
        self.edge_label.setVisible(bool(items))

    def _select_row(self) -> None:
        """Select the shown item's row without redrawing."""
        self.item_table.selectionModel().blockSignals(True)
        self.item_table.selectRow(self._item)
        self.item_table.selectionModel().blockSignals(False)

    def _on_row(self, current, _previous) -> None:
        if current.isValid() and current.row() != self._item:
            self._item = current.row()
            self._draw_item()

    def _draw_item(self) -> None:
        """Draw the selected item's plots, one plot per turn of the event loop (each takes a
        few hundredths of a second), so the window keeps answering; `busy` until the last."""
        self._drawing = self._plot_steps()
        self.plots.setUpdatesEnabled(False)  # painted once, when every plot is drawn
        self._draw_timer.start()

    def _draw_next(self) -> None:
        try:
            next(self._drawing)
        except StopIteration:
            self._drawing = None
            self._draw_timer.stop()
            self.plots.setUpdatesEnabled(True)

    def _plot_steps(self):
        """The plots of the selected item, drawn one per `next`; then their numbers."""
        records: list[list[str]] = []
        self._records = records
        if self._before is None or self._diary is None:
            self.plot_caption.setText("<b>Item plots</b>")
            self._show_columns(0)
            self.plot_model.set_rows(records)
            return
        name = self._diary.items[self._item]
        self.plot_caption.setText(f"<b>{escape(name)}</b>: series with linear trend, autocorrelation, "
                                  "within-day and weekday profiles")
        versions = [("as answered", self._diary, self._before.items[self._item], BEFORE)]
        if self._after is not None:
            versions.append(("after preparation", self._prepared,
                             self._after.items[self._item], AFTER))
        yield self._show_columns(len(versions))
        acf_top = max(_acf_extent(screen) for _, _, screen, _ in versions)
        for col, (version, diary, screen, colour) in enumerate(versions):
            title = "As answered" if col == 0 else "After preparation"
            self._headers[col].setText(f"<b>{title}</b>")
            plots = self._grid[col]
            yield self._series_plot(plots["series"], diary, screen, colour, version)
            yield self._acf_plot(plots["acf"], screen, colour, version, acf_top)
            yield self._profile_plot(plots["within_day"], screen.within_day, screen.mean,
                                     colour, version, "within day", "Mean by prompt number",
                                     "the diary has no prompt numbers")
            yield self._profile_plot(plots["weekday"], screen.weekday, screen.mean, colour,
                                     version, "weekday", "Mean by day of the week",
                                     "the days are not dates and there are no timestamps")
        self.plot_model.set_rows(records)

    def _show_columns(self, n: int) -> None:
        """Put the plots of `n` versions (0, 1 or 2) in the layout; the hint stands in for
        the second column when there is only one."""
        if n == self._shown_columns:
            return
        layout = self.plots.ci
        layout.clear()  # removes items from the layout; the plot objects are kept
        for col in range(n):
            layout.addItem(self._headers[col], row=0, col=col)
            for row, key in enumerate(PLOT_ROWS, start=1):
                layout.addItem(self._grid[col][key], row=row, col=col)
        if n == 1:
            layout.addItem(self._hint, row=1, col=1)
        self._shown_columns = n

    def _series_plot(self, plot, diary, screen: ItemScreen, colour, version) -> None:
        plot.clear()
        y = diary.values[:, self._item]
        x = np.arange(diary.n_occasions, dtype=float)
        answered = np.flatnonzero(~np.isnan(y))
        low, high = (np.nanmin(y), np.nanmax(y)) if answered.size else (0.0, 1.0)
        pad = 0.06 * max(high - low, 1e-9)
        low, high = low - pad, high + pad
        starts = np.concatenate([[0], np.flatnonzero(np.diff(diary.day)) + 1])
        ends = np.append(starts[1:], diary.n_occasions)
        odd = np.arange(1, len(starts), 2)
        if odd.size:
            shade = pg.BarGraphItem(x0=starts[odd] - 0.5, width=ends[odd] - starts[odd],
                                    y0=low, height=high - low, brush=pg.mkBrush(style.DAY_SHADE),
                                    pen=pg.mkPen(None))
            shade.setZValue(-10)
            plot.addItem(shade)
        plot.plot(x, y, pen=pg.mkPen(colour, width=1.2), connect="finite", symbol="o",
                  symbolSize=3, symbolPen=None, symbolBrush=colour,
                  antialias=False)   # a few hundred points: sharp enough, and many times faster to paint
        t = screen.trend
        if answered.size and t.slope is not None:
            first_last = answered[[0, -1]].astype(float)
            plot.plot(first_last, t.line(first_last), pen=pg.mkPen(**TREND_PEN))
        step = max(1, int(np.ceil(len(starts) / MAX_DAY_TICKS)))
        plot.getAxis("bottom").setTicks(
            [[(float(s), _short_day(diary.day_labels[diary.day[s]])) for s in starts[::step]],
             []])
        plot.setXRange(-0.5, diary.n_occasions - 0.5, padding=0)
        plot.setYRange(low, high, padding=0)
        plot.setTitle(escape(f"Series; dashed: trend ({p_phrase(t.p)})"), size="9pt")
        plot.setToolTip(f"Linear trend: {_slope_words(t)}, {p_phrase(t.p)}")
        for i in answered:
            self._record("series", version, int(i), _occasion_label(diary, int(i)), y[i])
        for i in answered[[0, -1]] if answered.size and t.slope is not None else ():
            self._record("trend", version, int(i), _occasion_label(diary, int(i)),
                         float(t.line(np.array([i]))[0]))

    def _acf_plot(self, plot, screen: ItemScreen, colour, version, top: float) -> None:
        plot.clear()
        lags = np.arange(1, len(screen.acf) + 1, dtype=float)
        heights = np.nan_to_num(np.array([np.nan if r is None else r for r in screen.acf]))
        plot.addItem(pg.BarGraphItem(x=lags, height=heights, width=0.6, brush=pg.mkBrush(colour),
                                     pen=pg.mkPen(None)))
        plot.addItem(pg.InfiniteLine(pos=0, angle=0, pen=pg.mkPen(style.INK, width=1)))
        bound = np.nan_to_num(np.array([np.nan if b is None else b for b in screen.acf_bound]))
        edges = np.concatenate([lags - 0.45, [lags[-1] + 0.45]])
        for sign in (1, -1):
            plot.addItem(pg.PlotCurveItem(edges, sign * bound, stepMode="center",
                                          pen=pg.mkPen(style.MUTED, width=1.2,
                                                       style=Qt.PenStyle.DashLine)))
        plot.setYRange(-1.1 * top, 1.1 * top, padding=0)
        plot.setXRange(0.4, len(lags) + 0.6, padding=0)
        plot.getAxis("bottom").setTicks([[(float(h), str(int(h))) for h in lags], []])
        plot.setTitle("Autocorrelation by lag; dashed: ±1.96/√pairs", size="9pt")
        plot.setToolTip("Autocorrelation of the item between prompts of the same segment")
        for h, r, n in zip(lags, screen.acf, screen.acf_pairs):
            self._record("autocorrelation", version, int(h), f"lag {int(h)}", r, n)

    def _profile_plot(self, plot, profile: Profile | None, mean: float | None, colour, version,
                      key, title, absent) -> None:
        plot.clear()
        plot.setTitle(f"{title}; dotted: the item's mean" if profile else title, size="9pt")
        if profile is None:
            text = pg.TextItem(f"No profile: {absent}.", color=style.MUTED, anchor=(0.5, 0.5))
            plot.addItem(text)
            text.setPos(0.5, 0.5)
            plot.hideAxis("bottom")
            plot.hideAxis("left")
            plot.showGrid(x=False, y=False)
            plot.setRange(xRange=(0, 1), yRange=(0, 1), padding=0)
            return
        plot.showAxis("bottom")
        plot.showAxis("left")
        plot.showGrid(x=False, y=True, alpha=0.25)
        if mean is not None:
            plot.addItem(pg.InfiniteLine(pos=mean, angle=0, pen=pg.mkPen(
                style.MUTED, width=1.2, style=Qt.PenStyle.DotLine)))
        x = np.arange(len(profile.labels), dtype=float)
        y = np.array([np.nan if m is None else m for m in profile.means])
        plot.plot(x, y, pen=pg.mkPen(colour, width=2), connect="finite", symbol="o",
                  symbolSize=7, symbolPen=None, symbolBrush=colour)
        plot.getAxis("bottom").setTicks([[(float(i), lab) for i, lab in zip(x, profile.labels)],
                                         []])
        plot.setXRange(-0.5, len(x) - 0.5, padding=0)
        plot.enableAutoRange(axis="y")
        for i, (lab, m, n) in enumerate(zip(profile.labels, profile.means, profile.counts)):
            self._record(key, version, i, lab, m, n)

    def _new_plot(self) -> pg.PlotItem:
        plot = pg.PlotItem()
        plot.setMenuEnabled(False)
        plot.hideButtons()
        plot.setMouseEnabled(x=False, y=False)
        plot.showGrid(x=False, y=True, alpha=0.25)
        plot.getAxis("left").setWidth(48)
        plot.setMinimumHeight(PLOT_ROW_HEIGHT - 20)
        return plot

    def _record(self, plot: str, version: str, position: int, label: str, value, count=None):
        """One number drawn in the item plots, for the CSV export."""
        self._records.append([plot, version, str(position), label,
                              "" if value is None or not np.isfinite(value) else f"{value:.6g}",
                              "" if count is None else str(count)])


def screen_versions(diary: Diary | None, before: Screening | None, prepared: Diary | None,
                    scales: dict | None, n_free: int | None, monitor=None) -> tuple:
    """(diary, prepared, screening as answered, screening after preparation or None); the
    screening as answered is reused when given."""
    if diary is not None and before is None:
        before = screen_diary(diary, scales, n_free, monitor)
    after = None if prepared is None else screen_diary(prepared, None, n_free, monitor)
    return diary, prepared, before, after


class RowsModel(QAbstractTableModel):
    """A read-only table of text rows (fast to refill; used for the plot numbers)."""

    def __init__(self, header: list[str], parent=None) -> None:
        super().__init__(parent)
        self._header = header
        self._rows: list[list[str]] = []

    def set_rows(self, rows: list[list[str]]) -> None:
        self.beginResetModel()
        self._rows = rows
        self.endResetModel()

    def rowCount(self, parent=QModelIndex()) -> int:
        return 0 if parent.isValid() else len(self._rows)

    def columnCount(self, parent=QModelIndex()) -> int:
        return 0 if parent.isValid() else len(self._header)

    def data(self, index, role=Qt.ItemDataRole.DisplayRole):
        if role == Qt.ItemDataRole.DisplayRole and index.isValid():
            return self._rows[index.row()][index.column()]
        return None

    def headerData(self, section, orientation, role=Qt.ItemDataRole.DisplayRole):
        if role == Qt.ItemDataRole.DisplayRole and orientation == Qt.Orientation.Horizontal:
            return self._header[section]
        return None


# ----- helpers -----------------------------------------------------------------------
def _row(cells: list[str]) -> list[QStandardItem]:
    row = [QStandardItem(c) for c in cells]
    for cell, text in zip(row, cells):
        if _is_number(text):
            cell.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
    return row


def _is_number(text: str) -> bool:
    try:
        float(text.replace("<", "").split(" ")[0])
        return True
    except ValueError:
        return False


def _fixed(value: float | None, digits: int = 2) -> str:
    return "—" if value is None else f"{round(value, digits) + 0.0:.{digits}f}"  # no "-0.00"


def _acf_extent(screen: ItemScreen) -> float:
    """Half-height of the ACF plot: the largest |r| or band, at least 0.3."""
    values = [abs(v) for v in (*screen.acf, *screen.acf_bound) if v is not None]
    return max([0.3, *values])


def _pct(share: float | None) -> float | None:
    return None if share is None else 100 * share



def _slope_words(t) -> str:
    if t.slope is None:
        return "no line"
    tiny = abs(t.slope) < 1e-12 * max(1.0, abs(t.intercept or 0.0))
    return "flat" if tiny else f"{t.slope:+.3g} per prompt"


def _short_day(label: str) -> str:
    """'2026-03-08' -> '03-08' (the year is in the table); other labels as they are."""
    return label[5:] if len(label) == 10 and label[4] == "-" and label[7] == "-" else label


def _occasion_label(diary: Diary, i: int) -> str:
    day = diary.day_labels[diary.day[i]]
    prompt = diary.prompt[i]
    return day if np.isnan(prompt) else f"{day} #{int(prompt)}"
