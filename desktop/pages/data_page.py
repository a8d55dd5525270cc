"""The Data page: the diary as the person answered it, and its screening.

Tab "Series": per-item time series (days shaded alternately, missed prompts as gaps with a
grey tick below the line), compliance per day, and answered/missing counts per item. Every
count comes from models.summary; this page only draws.
Tab "Screening": the ScreeningView (models.screening) of the session's diary with the
session's preparation steps, the free parameters of the current model and each item's answer
scale (stated at import, otherwise guessed: models.scales); ticking a step
there is an undoable edit of the session's preparation. The screening is recomputed only
when its inputs changed, and only while the tab is shown (in a worker thread).
"""

from __future__ import annotations

from html import escape
from pathlib import Path

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtGui import QStandardItem, QStandardItemModel
from PySide6.QtWidgets import (
    QAbstractItemView, QHBoxLayout, QHeaderView, QLabel, QListWidget, QListWidgetItem,
    QScrollArea, QSplitter, QTableView, QTabWidget, QToolButton, QVBoxLayout, QWidget,
)

from lagwise.desktop import style
from lagwise.desktop.export import export_menu
from lagwise.desktop.import_dialog import counted
from lagwise.desktop.pages.screening_view import ScreeningView
from lagwise.desktop.session import Session
from lagwise.models.errors import LagwiseError
from lagwise.models.preparation import describe
from lagwise.models.summary import diary_summary

ROW_HEIGHT = 120   # pixels per item plot
MAX_DAY_TICKS = 12  # day labels under the time series
MAX_BAR_TICKS = 6   # day labels under the (narrower) compliance chart


class DataPage(QWidget):
    """Shows the session's diary; redraws whenever the data change."""

    def __init__(self, session: Session, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("dataPage")
        self._session = session
        self._summary: dict | None = None
        self._screened: tuple | None = None  # the inputs the screening view last got
        self._series_stale = False  # the diary changed while the page was hidden: drawn when shown
        self._build()
        session.dataChanged.connect(self.refresh)
        for signal in (session.specChanged, session.optionsChanged, session.preparationChanged):
            signal.connect(self.update_screening)
        session.preparationChanged.connect(self._show_summary)
        self.screening.steps_changed.connect(self._steps_chosen)
        self.tabs.currentChanged.connect(lambda _: self.update_screening())
        self.refresh()

    # ----- building ------------------------------------------------------------------
    def _build(self) -> None:
        layout = QVBoxLayout(self)
        title = QLabel("Data")
        title.setFont(style.heading_font(self.font()))
        layout.addWidget(title)
        self.summary_label = QLabel()
        self.summary_label.setObjectName("dataSummary")
        self.summary_label.setWordWrap(True)
        self.summary_label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        layout.addWidget(self.summary_label)

        self.tabs = QTabWidget()
        self.tabs.setObjectName("dataTabs")
        self.tabs.setDocumentMode(True)
        layout.addWidget(self.tabs, 1)
        splitter = QSplitter(Qt.Orientation.Vertical)
        splitter.setObjectName("dataSplitter")
        top = QWidget()
        top_layout = QHBoxLayout(top)
        top_layout.setContentsMargins(0, 0, 0, 0)
        left = QVBoxLayout()
        left.addWidget(QLabel("Items shown:"))
        self.item_list = QListWidget()
        self.item_list.setAccessibleName("Items shown in the time series")
        self.item_list.setMaximumWidth(180)
        self.item_list.itemChanged.connect(self._draw_series)
        left.addWidget(self.item_list, 1)
        top_layout.addLayout(left)
        series_box = QVBoxLayout()
        series_box.addLayout(self._caption("Answers prompt by prompt (grey ticks: missed)",
                                           "series"))
        self.series = pg.GraphicsLayoutWidget()
        self.series.setObjectName("itemSeries")
        self.series_scroll = QScrollArea()
        self.series_scroll.setWidgetResizable(True)
        self.series_scroll.setWidget(self.series)
        self.series_scroll.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        series_box.addWidget(self.series_scroll, 1)
        top_layout.addLayout(series_box, 1)
        splitter.addWidget(top)

        bottom = QWidget()
        bottom_layout = QHBoxLayout(bottom)
        bottom_layout.setContentsMargins(0, 0, 0, 0)
        compliance_box = QVBoxLayout()
        compliance_box.addLayout(self._caption("Answered prompts per day", "compliance"))
        self.compliance = pg.PlotWidget()
        self.compliance.setObjectName("compliancePlot")
        self.compliance.setMenuEnabled(False)
        self.compliance.setLabel("left", "answered", units="%")
        compliance_box.addWidget(self.compliance, 1)
        bottom_layout.addLayout(compliance_box, 3)
        table_box = QVBoxLayout()
        self.missing_model = QStandardItemModel(self)
        table_box.addLayout(self._caption("Answers per item", "missing"))
        self.missing_table = QTableView()
        self.missing_table.setObjectName("missingTable")
        self.missing_table.setModel(self.missing_model)
        self.missing_table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.missing_table.verticalHeader().setVisible(False)
        self.missing_table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Stretch)
        table_box.addWidget(self.missing_table, 1)
        bottom_layout.addLayout(table_box, 2)
        splitter.addWidget(bottom)
        splitter.setSizes([520, 260])
        self.tabs.addTab(splitter, "Series")
        self.screening = ScreeningView()
        self.screening_scroll = QScrollArea()  # the window may be narrower than the screening
        self.screening_scroll.setWidgetResizable(True)
        self.screening_scroll.setFrameShape(QScrollArea.Shape.NoFrame)
        self.screening_scroll.setWidget(self.screening)
        self.tabs.addTab(self.screening_scroll, "Screening")
        self.tabs.setTabToolTip(1, "Trends, floor effects, dead items, daily and weekly patterns, "
                                   "whether the diary is long enough, and preparation steps")

        self._export_buttons["series"].setMenu(export_menu(self, self.series, None, "item-series"))
        self._export_buttons["compliance"].setMenu(export_menu(self, self.compliance, None,
                                                               "compliance"))
        self._export_buttons["missing"].setMenu(export_menu(self, None, self.missing_model,
                                                            "answers-per-item"))

    def _caption(self, text: str, key: str) -> QHBoxLayout:
        row = QHBoxLayout()
        label = QLabel(f"<b>{text}</b>")
        button = QToolButton()
        button.setText("Export")
        button.setPopupMode(QToolButton.ToolButtonPopupMode.InstantPopup)
        button.setAccessibleName(f"Export {text.lower()}")
        if not hasattr(self, "_export_buttons"):
            self._export_buttons: dict[str, QToolButton] = {}
        self._export_buttons[key] = button
        row.addWidget(label, 1)
        row.addWidget(button)
        return row

    # ----- drawing -------------------------------------------------------------------
    def refresh(self) -> None:
        """Redraw everything from the session's diary."""
        diary = self._session.diary
        self._summary = None if diary is None else diary_summary(diary)
        self.item_list.blockSignals(True)
        self.item_list.clear()
        if diary is not None:
            for name in diary.items:
                entry = QListWidgetItem(name)
                entry.setFlags(entry.flags() | Qt.ItemFlag.ItemIsUserCheckable)
                entry.setCheckState(Qt.CheckState.Checked)
                self.item_list.addItem(entry)
        self.item_list.blockSignals(False)
        self._show_summary()
        self._series_stale = not self.isVisible()   # drawing every series takes a while:
        if not self._series_stale:                  # a hidden page draws them when shown
            self._draw_series()
        self._draw_compliance()
        self._fill_missing()
        self.update_screening()

    # ----- screening -----------------------------------------------------------------
    def n_free(self) -> int | None:
        """Free parameters of the session's model on its diary (None: no valid model)."""
        session = self._session
        if session.diary is None:
            return None
        try:
            session.spec.validate(session.diary.items)
            return session.spec.n_free(session.options.estimator)
        except LagwiseError:
            return None

    def scales(self) -> dict | None:
        """Item -> (low, high) of its answer scale (None without a diary)."""
        diary, settings = self._session.diary, self._session.import_settings
        if diary is None or settings is None:
            return None
        return settings.recipe.item_scales(diary)

    def update_screening(self, force: bool = False) -> None:
        """Give the screening view the session's diary, steps and free parameters, when the
        Screening tab is shown (or `force`) and they differ from what it last got."""
        if not force and (self.tabs.currentWidget() is not self.screening_scroll
                          or not self.isVisible()):
            return
        session = self._session
        inputs = (session.diary, session.preparation, self.n_free(), self.scales())
        last = self._screened
        if last is not None and last[0] is inputs[0] and last[1:] == inputs[1:]:
            return
        self._screened = inputs
        self.screening.set_diary(*inputs)

    def showEvent(self, event) -> None:
        super().showEvent(event)
        if self._series_stale:
            self._series_stale = False
            self._draw_series()
        self.update_screening()

    def _steps_chosen(self, steps: tuple) -> None:
        """A step ticked in the screening view: record it in the session (undoable)."""
        session = self._session
        n_free, scales = self._screened[2:] if self._screened else (None, None)
        self._screened = (session.diary, tuple(steps), n_free, scales)
        try:
            session.set_preparation(steps, "Preparation steps")
        except LagwiseError:  # the view checks the steps first; keep both in step regardless
            self._screened = None
            self.update_screening(force=True)

    def _show_summary(self) -> None:
        summary = self._summary
        if summary is None:
            self.summary_label.setText(
                "No diary yet. Import a data file with <b>File ▸ Import data…</b> (Ctrl+I) "
                "or open the demo with <b>File ▸ Open demo</b>.")
            return
        occasions, answered = summary["occasions"], summary["answered"]
        share = f" ({100 * answered / occasions:.0f}%)" if occasions else ""
        windows = summary["windows"]["1"] + summary["partial_windows"]["1"]
        source = Path(summary["source"]).name if summary["source"] else "Diary"
        text = (f"<b>{escape(source)}</b>: {counted(len(summary['items']), 'item')}, "
                f"{counted(occasions, 'prompt')} over {counted(summary['days'], 'day')}, "
                f"{answered} answered{share}; {counted(summary['segments'], 'segment')}, "
                f"{counted(windows, 'lag window')} of two consecutive prompts "
                f"({summary['windows']['1']} complete).")
        if summary["warnings"]:
            text += "<br>" + "<br>".join(f"Note: {escape(w)}" for w in summary["warnings"])
        steps = self._session.preparation
        if steps:
            text += (f"<br>Before estimation: {escape(describe(steps))} (see Screening). The series "
                     "below are the answers as given.")
        else:  # a line either way: ticking a step moves nothing below (no repaint of the plots)
            text += "<br>No preparation before estimation (see Screening)."
        self.summary_label.setText(text)

    def shown_items(self) -> list[str]:
        return [self.item_list.item(i).text() for i in range(self.item_list.count())
                if self.item_list.item(i).checkState() == Qt.CheckState.Checked]

    def _draw_series(self) -> None:
        self.series.clear()
        diary = self._session.diary
        names = self.shown_items()
        self.series.setMinimumHeight(max(1, len(names)) * ROW_HEIGHT)
        if diary is None or not names:
            return
        x = np.arange(diary.n_occasions, dtype=float)
        starts = _day_starts(diary.day)
        ticks = _day_ticks(starts, [diary.day_labels[d] for d in diary.day[starts]])
        first = None
        for row, name in enumerate(names):
            y = diary.values[:, diary.items.index(name)]
            plot = self.series.addPlot(row=row, col=0)
            plot.setMenuEnabled(False)
            plot.hideButtons()
            plot.setMouseEnabled(x=True, y=False)
            plot.setLabel("left", escape(name))  # axis labels are HTML
            plot.getAxis("left").setWidth(64)
            plot.getAxis("bottom").setTicks([ticks, []])
            if row < len(names) - 1:
                plot.getAxis("bottom").setStyle(showValues=False)
            if len(starts) > 1 and np.isfinite(y).any():   # every other day: one item, not one per day
                ends = np.append(starts[1:], diary.n_occasions)
                odd = np.arange(1, len(starts), 2)
                low, high = np.nanmin(y), np.nanmax(y)
                pad = 0.15 * max(high - low, 1.0)
                shade = pg.BarGraphItem(x0=starts[odd] - 0.5, width=ends[odd] - starts[odd],
                                        y0=low - pad, height=high - low + 2 * pad,
                                        brush=pg.mkBrush(style.DAY_SHADE), pen=pg.mkPen(None))
                shade.setZValue(-10)
                plot.addItem(shade)
            colour = style.SERIES[row % len(style.SERIES)]
            plot.plot(x, y, pen=pg.mkPen(colour, width=1.5), connect="finite",
                      symbol="o", symbolSize=4, symbolPen=None, symbolBrush=colour)
            missed = np.isnan(y)
            if missed.any() and (~missed).any():
                low, high = np.nanmin(y), np.nanmax(y)
                base = low - 0.08 * max(high - low, 1.0)
                plot.plot(x[missed], np.full(int(missed.sum()), base), pen=None, symbol="t1",
                          symbolSize=6, symbolPen=None, symbolBrush=style.MUTED)
            if first is None:
                first = plot
            else:
                plot.setXLink(first)
        first.setXRange(-0.5, diary.n_occasions - 0.5, padding=0)

    def _draw_compliance(self) -> None:
        self.compliance.clear()
        if self._summary is None:
            return
        days = self._summary["compliance"]
        x = np.arange(len(days), dtype=float)
        heights = [100.0 * (d["fraction"] or 0.0) for d in days]
        bars = pg.BarGraphItem(x=x, height=heights, width=0.8,
                               brush=pg.mkBrush(style.SERIES[1]), pen=pg.mkPen(None))
        self.compliance.addItem(bars)
        labels = [d["day"] for d in days]
        step = max(1, int(np.ceil(len(labels) / MAX_BAR_TICKS)))
        self.compliance.getAxis("bottom").setTicks(
            [[(i, labels[i]) for i in range(0, len(labels), step)], []])
        self.compliance.setYRange(0, 100, padding=0.02)
        self.compliance.setXRange(-0.6, len(days) - 0.4, padding=0)

    def _fill_missing(self) -> None:
        model = self.missing_model
        model.clear()
        model.setHorizontalHeaderLabels(["Item", "Answered", "Missing", "Missing %", "Mean",
                                         "SD"])
        if self._summary is None:
            return
        for name, stats in self._summary["items"].items():
            total = stats["answered"] + stats["missing"]
            cells = [name, str(stats["answered"]), str(stats["missing"]),
                     f"{100 * stats['missing'] / total:.0f}" if total else "—",
                     "—" if stats["mean"] is None else f"{stats['mean']:.2f}",
                     "—" if stats["sd"] is None else f"{stats['sd']:.2f}"]
            row = [QStandardItem(c) for c in cells]
            for cell in row[1:]:
                cell.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
            model.appendRow(row)


def _day_starts(day: np.ndarray) -> np.ndarray:
    """Index of the first occasion of each day (occasions are in time order)."""
    return np.concatenate([[0], np.flatnonzero(np.diff(day)) + 1])


def _day_ticks(starts: np.ndarray, labels: list[str]) -> list[tuple[float, str]]:
    step = max(1, int(np.ceil(len(starts) / MAX_DAY_TICKS)))
    return [(float(starts[i]), labels[i]) for i in range(0, len(starts), step)]
