"""Dynamics tab: the path diagram of inertia and cross-lagged effects, and the inertia chart.

States are circles; each free cross-lagged effect is an arrow from the state at t-lag to
the state at t; each state's inertia (its own lagged path) is a loop on its circle. Values
are the engine's; line width follows the standardized size (palette.line_width). A path whose
95% interval (the engine's `Parameter.ci`) includes 0 is drawn faint unless "Show all paths
alike" is ticked.
"""

from __future__ import annotations

import html

import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtGui import QColor
from PySide6.QtWidgets import QCheckBox, QComboBox, QLabel, QSplitter, QVBoxLayout, QWidget

from lagwise.desktop.results.charts import bar_chart, plot_widget, style_plot
from lagwise.desktop.style import INK, RULE, SERIES
from lagwise.desktop.results.diagram import DiagramScene, DiagramView, Link, Node
from lagwise.desktop.results.tables import lagged_parameters, parameter_tooltip, paths_model
from lagwise.models.numbers import fmt
from lagwise.desktop.results.widgets import ResultsPanel, note_label, section_label, table_view
from lagwise.models.ctresults import effects_by_interval
from lagwise.models.kinds import Kind
from lagwise.models.results import FitResult, Parameter

LABEL_MODES = {"standardized": "Standardized", "estimate": "Estimate"}
FAINT_WORDS = "faint: 95% interval includes 0"


def _heading(p: Parameter, lag: int) -> str:
    if p.kind == Kind.DRIFT:
        return f"Auto-effect of {p.to}" if p.from_ == p.to else f"{p.from_} → change of {p.to}"
    if p.from_ == p.to and lag == 1:
        return f"Inertia of {p.to}"
    return f"{p.from_} (t-{lag}) → {p.to} (t)"


def _label(p: Parameter, mode: str) -> str:
    value = p.standardized if mode == "standardized" and p.standardized is not None else p.estimate
    return fmt(value)


def is_firm(p: Parameter) -> bool:
    """False when the 95% interval includes 0; True without an interval (nothing to judge)."""
    return p.ci is None or not p.ci[0] <= 0.0 <= p.ci[1]


def dynamics_links(result: FitResult, lag: int = 1, mode: str = "standardized",
                   alike: bool = False) -> list[Link]:
    """One Link per free lagged path at `lag` (loops for a state's own path); paths whose
    interval includes 0 are not firm unless `alike`."""
    return [Link(p.from_, p.to, p.estimate, p.standardized, _label(p, mode), parameter_tooltip(_heading(p, lag), p),
                 directed=True, parameter=p, firm=alike or is_firm(p))
            for p in lagged_parameters(result, lag)]


class DynamicsDiagram(DiagramScene):
    """The dynamics path diagram of one result at one lag."""

    def show_result(self, result: FitResult, lag: int = 1, mode: str = "standardized",
                    alike: bool = False) -> None:
        links = dynamics_links(result, lag, mode, alike)
        nodes = [Node(s, tooltip=f"State {s}") for s in result.states]
        what = "standardized effects" if mode == "standardized" else "estimates"
        own = "inertia" if lag == 1 else "own lag-2 path"
        legend = [f"Arrows: the state at t-{lag} → the state at t. Loops: {own}. Labels: {what}."]
        cross = [l for l in links if l.source != l.target]
        message = "" if cross else "No cross-lagged effects are free in this model."
        title = "Lag-1 dynamics" if lag == 1 else "Lag-2 paths"
        if result.continuous is not None:
            legend[0] = (f"Continuous time: arrows from a state to the rate of change of another "
                         f"(drift per {result.continuous.unit[:-1]}). Loops: auto-effects "
                         f"(negative: the state returns to its level). Labels: {what}.")
            title = "Continuous-time drift"
        self.draw(nodes, links, title=title, legend=legend, message=message,
                  faint_words="" if alike else FAINT_WORDS,
                  hint="Hover over a path for its estimate, standardized value, SE and 95% "
                       "interval.")

    def arrows(self) -> list:
        """The drawn cross-lagged arrows (loops excluded)."""
        return [i for i in self.link_items() if i.link.source != i.link.target]


class DynamicsPanel(ResultsPanel):
    """Diagram and inertia chart above, the table of lagged paths below."""

    name = "dynamics"

    def __init__(self, parent=None):
        super().__init__("Dynamics: inertia and cross-lagged effects", parent)
        self._result: FitResult | None = None
        self.lag_box = QComboBox()
        self.lag_box.setToolTip("Which lag to draw")
        self.lag_box.currentIndexChanged.connect(self._redraw)
        self.label_box = QComboBox()
        for key, words in LABEL_MODES.items():
            self.label_box.addItem(words, key)
        self.label_box.setToolTip("What the numbers on the paths show")
        self.label_box.currentIndexChanged.connect(self._redraw)
        self.alike_box = QCheckBox("Show all paths alike")
        self.alike_box.setToolTip("Draw paths whose 95% interval includes 0 like the others "
                                  "(by default they are faint)")
        self.alike_box.toggled.connect(self._redraw)
        index = self.head.indexOf(self.export_button)
        for offset, widget in enumerate((self.alike_box, QLabel("Lag"), self.lag_box, QLabel("Labels"),
                                         self.label_box)):
            self.head.insertWidget(index + offset, widget)
        self.head.insertSpacing(index + 5, 12)

        self.scene = DynamicsDiagram(self)
        self.diagram_view = DiagramView(self.scene)
        self.chart = plot_widget()
        self.chart.setMinimumHeight(190)   # with its note, no taller than the diagram's minimum
        style_plot(self.chart.getPlotItem(), "Inertia with 95% interval")
        self.chart_note = note_label()
        self.effect_box = QComboBox()   # continuous time: own effects, or one state's effects
        self.effect_box.setToolTip("Which effects over an interval to draw")
        self.effect_box.currentIndexChanged.connect(self._redraw_over_time)
        self.effect_box.hide()
        chart_box = QWidget()
        chart_layout = QVBoxLayout(chart_box)
        chart_layout.setContentsMargins(0, 0, 0, 0)
        chart_layout.addWidget(self.effect_box)
        chart_layout.addWidget(self.chart, 1)
        chart_layout.addWidget(self.chart_note)
        top = QSplitter(Qt.Orientation.Horizontal)
        top.addWidget(self.diagram_view)
        top.addWidget(chart_box)
        top.setSizes([600, 400])
        self.paths = paths_model(self)
        self.paths_view = table_view(self.paths)
        bottom = QWidget()
        column = QVBoxLayout(bottom)
        column.setContentsMargins(0, 0, 0, 0)
        column.addWidget(section_label("Lagged paths"))
        column.addWidget(self.paths_view)
        self.split = QSplitter(Qt.Orientation.Vertical)
        self.split.addWidget(top)
        self.split.addWidget(bottom)
        self.split.setChildrenCollapsible(False)
        self.split.setStretchFactor(0, 1)
        self.split.setSizes([640, 260])
        self.body.addWidget(self.split)

    def show_result(self, result: FitResult) -> None:
        self._result = result
        self.lag_box.blockSignals(True)
        self.lag_box.clear()
        for lag in range(1, max(result.spec.lags, 1) + 1):
            self.lag_box.addItem(f"{lag}", lag)
        self.lag_box.setEnabled(result.spec.lags > 1)
        self.lag_box.blockSignals(False)
        self._show_inertia(result)
        self._redraw()

    @property
    def lag(self) -> int:
        return self.lag_box.currentData() or 1

    def _redraw(self) -> None:
        if self._result is None:
            return
        self.scene.show_result(self._result, self.lag, self.label_box.currentData(),
                               self.alike_box.isChecked())
        self.paths.set_rows(lagged_parameters(self._result, self.lag))
        self._fit_table()

    def _fit_table(self) -> None:
        """Give the table of lagged paths the height of all its rows, up to 55% of the panel."""
        view = self.paths_view
        rows = view.verticalHeader().length() + view.horizontalHeader().height() + 2 * view.frameWidth() + 4
        column = view.parentWidget().layout()
        want = rows + column.itemAt(0).sizeHint().height() + max(column.spacing(), 0) + 4
        total = sum(self.split.sizes())
        if total > 0:
            want = min(want, int(0.55 * total))
            self.split.setSizes([total - want, want])

    def _show_inertia(self, result: FitResult) -> None:
        self.effect_box.setVisible(result.continuous is not None)
        if result.continuous is not None:
            self.effect_box.blockSignals(True)
            chosen = self.effect_box.currentData()
            self.effect_box.clear()
            self.effect_box.addItem("Each state's own effect", None)
            for state in result.states:
                self.effect_box.addItem(f"Effects of {state} on the others", state)
            index = self.effect_box.findData(chosen)
            self.effect_box.setCurrentIndex(max(index, 0))
            self.effect_box.blockSignals(False)
            self._show_over_time(result)
            return
        plot = self.chart.getPlotItem()
        if plot.legend is not None:   # left by a continuous-time result
            plot.legend.scene().removeItem(plot.legend)
            plot.legend = None
            plot.setLabel("bottom", "")
            style_plot(plot, "Inertia with 95% interval")
        inertia = {p.to: p for p in lagged_parameters(result, 1) if p.from_ == p.to}
        states = list(result.states)
        chosen = [inertia.get(s) for s in states]
        bar_chart(plot, states, [None if p is None else p.estimate for p in chosen],
                  ["" if p is None else fmt(p.estimate) for p in chosen],
                  low=[None if p is None or p.ci is None else p.ci[0] for p in chosen],
                  high=[None if p is None or p.ci is None else p.ci[1] for p in chosen],
                  value_axis="inertia (estimate)")
        fixed = [s for s, p in zip(states, chosen) if p is None]
        note = ("Whiskers: 95% interval (estimate ± 1.96 SE). Near 0: the state returns to its "
                "usual level quickly; near 1: it lingers from prompt to prompt.")
        if fixed:
            note += " Inertia fixed in this model: " + ", ".join(fixed) + "."
        self.chart_note.setText(note)

    def _redraw_over_time(self) -> None:
        if self._result is not None and self._result.continuous is not None:
            self._show_over_time(self._result)

    def _show_over_time(self, result: FitResult) -> None:
        """Continuous time: over intervals of 0 to 8 hours, each state's own effect
        B_ii(D) = [expm(A D)]_ii, or the effects B_ji(D) of the chosen state i on the others,
        with their delta-method 95% bands (models.ctresults)."""
        effects = effects_by_interval(result)
        plot = self.chart.getPlotItem()
        plot.clear()
        if plot.legend is not None:
            plot.legend.clear()
        source = self.effect_box.currentData()
        states = list(result.states)
        if source is None:
            curves = [(i, i, state) for i, state in enumerate(states)]
            title, axis = "Own effect over an interval, 95% band", "share of a rise left"
        else:
            i = states.index(source)
            curves = [(j, i, f"on {state}") for j, state in enumerate(states) if j != i]
            title, axis = f"Effects of {source} over an interval, 95% band", "effect of a rise"
        style_plot(plot, html.escape(title))
        if plot.legend is None:
            plot.addLegend(offset=(-10, 10), labelTextColor=INK)
        plot.addItem(pg.InfiniteLine(pos=0, angle=0, pen=pg.mkPen(RULE, width=1)))
        x = effects.intervals
        for n, (to, from_, name) in enumerate(curves):
            colour = QColor(SERIES[(to if source is None else n) % len(SERIES)])
            lower = pg.PlotDataItem(x, effects.lower[:, to, from_], pen=pg.mkPen(None))
            upper = pg.PlotDataItem(x, effects.upper[:, to, from_], pen=pg.mkPen(None))
            fill = QColor(colour)
            fill.setAlphaF(0.18)
            band = pg.FillBetweenItem(lower, upper, brush=pg.mkBrush(fill))
            band.setZValue(-5)
            for item in (lower, upper, band):
                plot.addItem(item)
            plot.plot(x, effects.values[:, to, from_], pen=pg.mkPen(colour, width=2.2),
                      name=html.escape(name))
        unit = result.continuous.unit
        plot.setLabel("bottom", f"interval ({unit})")
        plot.setLabel("left", axis)
        self.chart_note.setText(
            f"How much of a rise in a state remains, or reaches another state, after an "
            f"interval: [exp(A D)]. Bands: 95% delta method. The diary's median interval is "
            f"{fmt(result.continuous.median_interval)} {unit}.")

    def pictures(self) -> dict:
        return {"diagram": self.scene, "inertia chart": self.chart}

    def tables(self) -> dict:
        return {"lagged paths": self.paths}
