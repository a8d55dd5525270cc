"""Measurement tab: how strongly each item reflects its state.

The loadings table (estimate, standardized, SE, 95% interval, R-squared) and, beside it, bars
of the standardized loadings and of each item's R-squared (the share of its variance the
states explain). All numbers come from the FitResult.
"""

from __future__ import annotations

import pyqtgraph as pg
from PySide6.QtCore import Qt, QTimer
from PySide6.QtWidgets import QSplitter, QVBoxLayout, QWidget

from lagwise.desktop.results.charts import bar_chart, style_plot
from lagwise.desktop.results.tables import loading_rows, loadings_model
from lagwise.models.numbers import fmt
from lagwise.desktop.results.widgets import ResultsPanel, fit_height, note_label, table_view, table_width
from lagwise.models.results import FitResult


class MeasurementPanel(ResultsPanel):
    name = "measurement"

    def __init__(self, parent=None):
        super().__init__("Measurement: loadings and R²", parent)
        self.loadings = loadings_model(self)
        self.table = table_view(self.loadings)
        self.note = note_label()
        left = QWidget()
        column = QVBoxLayout(left)
        column.setContentsMargins(0, 0, 0, 0)
        column.addWidget(self.table)
        column.addWidget(self.note)
        column.addStretch(1)
        self.left = left

        self.chart = pg.GraphicsLayoutWidget()
        self.chart.setBackground("w")
        self.chart.setMinimumSize(300, 240)
        self.loading_plot = self.chart.addPlot(row=0, col=0)
        self.r2_plot = self.chart.addPlot(row=0, col=1)
        style_plot(self.loading_plot, "Standardized loading")
        style_plot(self.r2_plot, "R²")
        self.r2_plot.setYLink(self.loading_plot)
        self.r2_plot.getAxis("left").setStyle(showValues=False)
        self.r2_plot.getAxis("left").setWidth(4)
        self.chart.ci.layout.setColumnStretchFactor(0, 3)
        self.chart.ci.layout.setColumnStretchFactor(1, 2)
        self.r2_plot.setMinimumWidth(170)
        self.r2_plot.setMaximumWidth(240)
        self.chart.ci.layout.setHorizontalSpacing(28)

        self.split = QSplitter(Qt.Orientation.Horizontal)
        self.split.addWidget(left)
        self.split.addWidget(self.chart)
        self.body.addWidget(self.split)

    def show_result(self, result: FitResult) -> None:
        rows = loading_rows(result)
        self.loadings.set_rows(rows)
        fit_height(self.table)
        self.left.setMaximumWidth(table_width(self.table))
        names = [f"{r.parameter.to} ({r.parameter.from_})" for r in rows]
        std = [r.parameter.standardized for r in rows]
        bar_chart(self.loading_plot, names, std, [fmt(v) for v in std], horizontal=True,
                  limits=(min(-0.05, min((v for v in std if v is not None), default=0) - 0.45), 1.3))
        r2 = [r.r_squared for r in rows]
        bar_chart(self.r2_plot, names, r2, [fmt(v) for v in r2], horizontal=True, signed=False,
                  limits=(0.0, 1.25))
        self.r2_plot.getAxis("left").setStyle(showValues=False)
        QTimer.singleShot(0, self, self._fit_chart)  # once the plots have laid out their new axes
        marker = result.spec.identification == "marker"
        self.note.setText(
            ("Each state's marker item has its loading fixed at 1 (that sets the state's scale); "
             if marker else "Each state's innovation variance is fixed at 1 (that sets its scale); ")
            + "the standardized loading puts every item on the same scale. R² is the share of an "
            "item's variance explained by its state; the rest is the item's unique variance. "
            "95% intervals are estimate ± 1.96 SE.")

    def _fit_chart(self) -> None:
        """Keep both plots whole: the chart no narrower than its plots need, the table beside
        it as wide as its columns when there is room (it scrolls sideways otherwise)."""
        self.chart.setMinimumWidth(round(self.chart.ci.minimumWidth()) + 2)
        width = self.left.maximumWidth()
        self.split.setSizes([width, max(self.split.width() - width, 1)])
        fit_height(self.table)
        if self.split.sizes()[0] < width:  # room for the sideways scroll bar below the rows
            self.table.setFixedHeight(self.table.maximumHeight() + self.table.horizontalScrollBar().sizeHint().height())

    def pictures(self) -> dict:
        return {"loading chart": self.chart}

    def tables(self) -> dict:
        return {"loadings": self.loadings}
