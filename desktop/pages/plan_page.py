"""The Plan page: how many days would the next diary need? (models.plan)

The assumed truth is the current result (or, before an estimate, the model's states with
default values: models.plantruth). The designs are typed as a list of days with the prompts
per day, the answered share and its pattern (estimator and night rule: the analysis's own); Run asks the window to simulate them in its
worker (`runRequested`), and `show_plan` shows the table per path and design, the power
curve over days with its Monte Carlo range and the 80% line, and the plain sentences.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QStandardItem, QStandardItemModel
from PySide6.QtWidgets import (
    QComboBox, QDoubleSpinBox, QFormLayout, QHBoxLayout, QLabel, QLineEdit,
    QPushButton, QSpinBox, QTableView, QVBoxLayout, QWidget,
)

from lagwise.desktop import style
from lagwise.desktop.export import export_menu, menu_button
from lagwise.desktop.session import Session
from lagwise.models.design import PATTERNS, Design
from lagwise.models.errors import LagwiseError
from lagwise.models.planresults import CAUTION, HEADER, TARGET, Plan, table_rows
from lagwise.models import plantruth

NO_MODEL = "Choose the states on the States page first: a plan needs a model."


class PlanPage(QWidget):
    """The Plan page (module docstring)."""

    runRequested = Signal(object, object, int, int)   # truth, designs, replications, seed

    def __init__(self, session: Session, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.session = session
        self.plan: Plan | None = None
        layout = QVBoxLayout(self)
        title = QLabel("Plan")
        title.setFont(style.heading_font(self.font()))
        layout.addWidget(title)
        caution = QLabel(CAUTION)
        caution.setWordWrap(True)
        caution.setStyleSheet(f"color: {style.NOTE};")
        layout.addWidget(caution)
        self.truth_note = QLabel()
        self.truth_note.setWordWrap(True)
        layout.addWidget(self.truth_note)
        layout.addLayout(self._design_row())
        self.problem = QLabel()
        self.problem.setWordWrap(True)
        self.problem.setStyleSheet(f"color: {style.WARNING};")
        self.problem.hide()
        layout.addWidget(self.problem)
        body = QHBoxLayout()
        self.model = QStandardItemModel(0, len(HEADER), self)
        self.model.setHorizontalHeaderLabels(list(HEADER))
        self.table = QTableView()
        self.table.setModel(self.model)
        self.table.verticalHeader().hide()
        self.table.setTextElideMode(Qt.TextElideMode.ElideNone)
        body.addWidget(self.table, 3)
        self.curve = pg.PlotWidget(background=style.PAPER)
        self.curve.setLabel("bottom", "days")
        self.curve.setLabel("left", "power")
        self.curve.setYRange(0.0, 1.0)
        self.curve.addLegend(offset=(10, 10), brush=pg.mkBrush(255, 255, 255, 215),
                             pen=pg.mkPen(style.MUTED, width=0.5))   # lines stay readable
        body.addWidget(self.curve, 2)
        layout.addLayout(body, 1)
        self.sentences = QLabel()
        self.sentences.setWordWrap(True)
        self.sentences.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        layout.addWidget(self.sentences)
        self.export_button.setMenu(export_menu(self, self.curve, self.model, "plan", CAUTION))
        session.resultChanged.connect(self._show_truth)
        session.specChanged.connect(self._show_truth)
        self._show_truth()

    def _design_row(self) -> QHBoxLayout:
        row = QHBoxLayout()
        form = QFormLayout()
        self.days = QLineEdit("20, 40, 60")
        self.days.setToolTip("The days of each design to compare, separated by commas")
        form.addRow("Days", self.days)
        self.prompts = QSpinBox(minimum=2, maximum=1000, value=6)
        form.addRow("Prompts per day", self.prompts)
        row.addLayout(form)
        form2 = QFormLayout()
        self.answered = QDoubleSpinBox(minimum=0.05, maximum=1.0, singleStep=0.05, value=0.75)
        form2.addRow("Share answered", self.answered)
        self.pattern = QComboBox()
        self.pattern.addItems(PATTERNS)
        self.pattern.setToolTip("random: any prompt alike; late: more missed late in the day")
        form2.addRow("Missed prompts", self.pattern)
        row.addLayout(form2)
        form3 = QFormLayout()
        self.replications = QSpinBox(minimum=2, maximum=100_000, value=200)
        form3.addRow("Replications", self.replications)
        self.seed = QSpinBox(minimum=0, maximum=999_999, value=0)   # any seed will do: narrow
        form3.addRow("Seed", self.seed)
        row.addLayout(form3)
        buttons = QVBoxLayout()
        self.run_button = QPushButton("Run plan")
        self.run_button.clicked.connect(self.request_run)
        buttons.addWidget(self.run_button)
        self.export_button = menu_button("Export", "Save the table as CSV or the power curve "
                                                   "as a picture")
        buttons.addWidget(self.export_button)
        row.addLayout(buttons)
        row.addStretch(1)
        return row

    # ----- the truth and the designs -----------------------------------------------------
    def truth(self) -> plantruth.Truth | None:
        """The current result's estimates, else the model's states with default values."""
        result, spec = self.session.result, self.session.spec
        if result is not None and result.stationary:
            return plantruth.from_result(result)
        if spec is None or not spec.states:
            return None
        return plantruth.from_json({"states": [s.to_json() for s in spec.states]})

    def _show_truth(self) -> None:
        result = self.session.result
        if result is not None and result.stationary:
            text = ("Assumed model: the current estimates (every lagged path as estimated).")
        elif self.session.spec is not None and self.session.spec.states:
            text = ("Assumed model: the states of the model with default values (inertia "
                    f"{plantruth.INERTIA:g}, no cross-lagged effects, item reliability "
                    f"{plantruth.RELIABILITY:g}); estimate the model to plan from its estimates.")
        else:
            text = NO_MODEL
        self.truth_note.setText(text)

    def designs(self) -> list[Design]:
        """The typed designs; LagwiseError in one line for a wrong entry."""
        parts = [p.strip() for p in self.days.text().split(",") if p.strip()]
        if not parts or not all(p.isdigit() for p in parts):
            raise LagwiseError("Type the days of each design as whole numbers separated by "
                               "commas, e.g. 20, 40, 60.")
        options = self.session.options    # the estimator and night rule of the analysis
        return [Design(int(days), self.prompts.value(), round(self.answered.value(), 4),
                       self.pattern.currentText(), options.estimator, options.night_gap)
                for days in sorted({int(p) for p in parts})]

    def request_run(self) -> None:
        try:
            truth, designs = self.truth(), self.designs()
            if truth is None:
                raise LagwiseError(NO_MODEL)
        except LagwiseError as error:
            self.problem.setText(str(error))
            self.problem.show()
            return
        self.problem.hide()
        self.runRequested.emit(truth, designs, self.replications.value(), self.seed.value())

    # ----- results ---------------------------------------------------------------------
    def show_plan(self, plan: Plan) -> None:
        """The table, the power curve and the sentences of a finished (or stopped) plan."""
        self.plan = plan
        self.model.removeRows(0, self.model.rowCount())
        for row in table_rows(plan):
            items = [QStandardItem(text) for text in row]
            for item in items[2:]:
                item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
            self.model.appendRow(items)
        self.table.resizeColumnsToContents()
        self._draw_curve(plan)
        stopped = ([] if plan.complete else
                   ["Stopped early: these results use the diaries finished so far."])
        self.sentences.setText("\n".join(stopped + plan.sentences()))

    def _draw_curve(self, plan: Plan) -> None:
        """Power over days per path, with its Monte Carlo 95% range as an error bar; the paths'
        points are set a little apart along the days so that their bars do not cover each
        other."""
        self.curve.clear()
        days = np.array([s.design.days for s in plan.designs], dtype=float)
        drawn = [n for n, path in enumerate(plan.designs[0].paths)
                 if path.truth != 0.0]   # a path that is 0 in the truth has no power to plan for
        spread = 0.015 * max(float(np.ptp(days)), 1.0)
        for k, n in enumerate(drawn):
            path = plan.designs[0].paths[n]
            colour = style.SERIES[n % len(style.SERIES)]
            x = days + (k - (len(drawn) - 1) / 2) * spread
            power = np.array([s.paths[n].power for s in plan.designs])
            err = 1.96 * np.array([s.paths[n].power_se for s in plan.designs])
            self.curve.addItem(pg.ErrorBarItem(
                x=x, y=power, top=np.minimum(power + err, 1.0) - power,
                bottom=power - np.maximum(power - err, 0.0), beam=0.6 * spread,
                pen=pg.mkPen(colour, width=1)))
            self.curve.plot(x, power, pen=pg.mkPen(colour, width=2), symbol="o",
                            symbolSize=6, symbolBrush=colour, name=path.label)
        line = pg.InfiniteLine(pos=TARGET, angle=0,
                               pen=pg.mkPen(style.MUTED, width=1, style=Qt.PenStyle.DashLine),
                               label="80%", labelOpts={"position": 0.97, "color": style.MUTED})
        self.curve.addItem(line)
        self.curve.setYRange(0.0, 1.0)
