"""ResultsView: the tabs that show one FitResult (or a plain message when there is none).

Besides the five tabs over the estimate, "Responses" (what follows a rise in one state, beside
"Dynamics"), "State scores" (exact estimator only), "Lag-2 check" (a Lag2View, exposed as
`lag2`, whose signals the window wires), "Stability" (the bootstrap: a StabilityPanel
exposed as `stability`, wired the same way), "Runs" (every estimate kept, which is current:
`runs`, editing the session given to `set_session`) and "Compare" (the runs chosen there side
by side: `compare`). Above the tabs, on every one of them, the warnings
strip lists everything to check about the shown fit (models.advice: the fit's flags, the
diary's readiness for this model, the lag-2 check of its lag-1 model); below them, the caution
line carries the fit's cautions, which every exported table repeats.
"""

from __future__ import annotations

from PySide6.QtCore import Qt, QTimer
from PySide6.QtWidgets import QHBoxLayout, QLabel, QStackedWidget, QTabWidget, QVBoxLayout, QWidget

from lagwise.desktop.results.compare_view import ComparePanel
from lagwise.desktop.results.dynamics_diagram import DynamicsPanel
from lagwise.desktop.results.fit_view import FitPanel
from lagwise.desktop.results.innovations import InnovationsPanel
from lagwise.desktop.results.measurement import MeasurementPanel
from lagwise.desktop.results.lag2_view import Lag2View
from lagwise.desktop.results.parameters import ParametersPanel
from lagwise.desktop.results.responses_view import ResponsesPanel
from lagwise.desktop.results.runs_view import RunsPanel
from lagwise.desktop.results.stability_view import StabilityPanel
from lagwise.desktop.results.state_scores import StateScoresPanel
from lagwise.desktop.results.warnings_strip import CautionLine, WarningsStrip
from lagwise.desktop.results.widgets import ResultsPanel
from lagwise.models.advice import all_clear, caution_line, data_readiness, fit_warnings
from lagwise.models.diary import Diary
from lagwise.models.results import FitResult

EMPTY_MESSAGE = ("No results yet.\n\nAssign items to states, choose the lagged paths, "
                 "then press Estimate: the loadings, dynamics, innovations, fit and every "
                 "parameter will appear here.")
ESTIMATING_MESSAGE = "Estimating…\n\nThe results will appear here when the estimation finishes."


class ResultsView(QWidget):
    """Tabs Measurement, Dynamics, Responses, Innovations, Fit, Parameters, State scores,
    Lag-2 check, Stability, Runs, Compare.

    `show_result(None)` shows the empty state. Each tab is a ResultsPanel with
    `pictures()` and `tables()` (what its Export button saves). `panels()` are the five tabs
    over the estimate itself; `state_scores` draws the exact estimator's scores on the days of
    the diary given to `set_diary`; `lag2` shows a lag-2 check passed to `lag2.show_check`.
    """

    def __init__(self, parent: QWidget | None = None):
        super().__init__(parent)
        self._result: FitResult | None = None
        self._diary: Diary | None = None
        self._readiness = None
        self.measurement = MeasurementPanel()
        self.dynamics = DynamicsPanel()
        self.responses = ResponsesPanel()
        self.innovations = InnovationsPanel()
        self.fit = FitPanel()
        self.parameters = ParametersPanel()
        self.state_scores = StateScoresPanel()
        self.lag2 = Lag2View()
        self.stability = StabilityPanel()
        self.tabs = QTabWidget()
        self.tabs.setDocumentMode(True)
        for panel, title in zip(self.all_panels(), ("Measurement", "Dynamics", "Responses",
                                                    "Innovations", "Fit", "Parameters",
                                                    "State scores", "Lag-2 check")):
            self.tabs.addTab(panel, title)
        self.runs = RunsPanel()
        self.compare = ComparePanel()
        self.tabs.addTab(self.stability, "Stability")
        self.tabs.addTab(self.runs, "Runs")
        self.tabs.addTab(self.compare, "Compare")
        self.runs.compare_requested.connect(self._compare)
        self.warnings = WarningsStrip()
        self.caution = CautionLine()
        self.lag2.check_changed.connect(self._show_warnings)
        self._unfilled: set[ResultsPanel] = set()
        # a timer, not a posted call (posted calls that post again all run in one pass), and
        # not a zero one: between two fills the window paints and serves its other timers
        self._filler = QTimer(self)
        self._filler.setSingleShot(True)
        self._filler.setInterval(20)
        self._filler.timeout.connect(self._fill_rest)
        self.tabs.currentChanged.connect(lambda _index: self._fill(self.tabs.currentWidget()))
        self.empty = QLabel(EMPTY_MESSAGE)
        self.empty.setAlignment(Qt.AlignmentFlag.AlignCenter)
        self.empty.setWordWrap(True)
        self.empty.setMaximumWidth(560)
        self.empty.setStyleSheet("color: #4a5358; font-size: 13pt;")
        empty_page = QWidget()
        centred = QHBoxLayout(empty_page)
        centred.addWidget(self.empty)
        self.empty_page = empty_page
        self.stack = QStackedWidget()
        self.stack.addWidget(empty_page)
        self.stack.addWidget(self.tabs)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)
        layout.setSpacing(4)
        layout.addWidget(self.warnings)
        layout.addWidget(self.stack, 1)
        layout.addWidget(self.caution)
        self.warnings.hide()
        self.caution.hide()

    def follow_worker(self, worker, job: str) -> None:
        """Say "Estimating…" instead of the empty message while `worker` runs a `job` run."""
        self._worker, self._job = worker, job
        worker.started.connect(self._worker_changed)
        worker.idle.connect(self._worker_changed)

    def _worker_changed(self) -> None:
        running = self._worker.busy and self._worker.job == self._job
        self.empty.setText(ESTIMATING_MESSAGE if running else EMPTY_MESSAGE)

    def heightForWidth(self, width: int) -> int:  # noqa: N802 (Qt's name)
        """-1 (none): the page holding the tabs sizes them by their minimum, not by the tallest
        tab's wrapped text at the present width (which would make the whole page scroll)."""
        return -1

    @property
    def result(self) -> FitResult | None:
        return self._result

    def set_session(self, session) -> None:
        """The session whose runs the Runs tab lists and edits (desktop.session.Session)."""
        self.runs.set_session(session)
        session.runsChanged.connect(self.compare.clear)

    def _compare(self, runs) -> None:
        self.compare.show_runs(runs)
        self.tabs.setCurrentWidget(self.compare)

    def tab_panels(self) -> tuple[ResultsPanel, ...]:
        """Every tab's panel, in order."""
        return (*self.all_panels(), self.stability, self.runs, self.compare)

    def panels(self) -> tuple[ResultsPanel, ...]:
        return (self.measurement, self.dynamics, self.innovations, self.fit, self.parameters)

    def all_panels(self) -> tuple[ResultsPanel, ...]:
        """Every tab, in order: the estimate's panels (the responses beside the dynamics), the
        state scores, the lag-2 check."""
        measurement, dynamics, *others = self.panels()
        return (measurement, dynamics, self.responses, *others, self.state_scores, self.lag2)

    def set_diary(self, diary: Diary | None) -> None:
        """The session's diary, whose days and missed prompts the state scores are drawn on and
        whose readiness for the next shown result's model the warnings strip reports."""
        self._diary = diary
        self.state_scores.set_diary(diary)

    def show_result(self, result: FitResult | None) -> None:
        """Show a result in every tab, or the empty message for None."""
        self._result = result
        if result is None:
            self._unfilled.clear()
            self.stack.setCurrentWidget(self.empty_page)
            self.warnings.hide()
            self.caution.hide()
            return
        self._readiness = data_readiness(self._diary, result)
        caution = caution_line(result)
        for panel in self.tab_panels():
            panel.caution = caution
        self._unfilled = {panel for panel in self.all_panels() if panel in self.deferred()}
        for panel in self.all_panels():
            if panel not in self._unfilled:
                panel.show_result(result)
        if self._unfilled:
            self._filler.start()
        self.caution.show_result(result)
        self._show_warnings()
        self.stability.show_result(result)
        self.parameters.show_bootstrap(self.stability.bootstrap)
        self.responses.set_bootstrap(self.stability.bootstrap)
        self.stack.setCurrentWidget(self.tabs)
        self.warnings.show()
        self.caution.show()

    def deferred(self) -> tuple[ResultsPanel, ...]:
        """The tabs whose whole content is their result: they are filled in the following turns
        of the event loop, one per turn and the shown one first (or at once when a tab is
        chosen), so showing a result keeps the window answering (the Measurement charts alone
        take tens of milliseconds)."""
        return (self.measurement, self.dynamics, self.innovations, self.fit)

    def _fill(self, panel) -> None:
        if panel in self._unfilled:
            self._unfilled.discard(panel)
            panel.show_result(self._result)

    def _fill_rest(self) -> None:
        """Fill one tab left to fill per turn of the event loop, the shown one first."""
        if self._unfilled:
            shown = self.tabs.currentWidget()
            self._fill(shown if shown in self._unfilled else
                       next(p for p in self.all_panels() if p in self._unfilled))
        if self._unfilled:
            self._filler.start()

    @property
    def filling(self) -> bool:
        """Some tab still waits to be filled with the shown result."""
        return bool(self._unfilled)

    def _show_warnings(self) -> None:
        if self._result is not None:
            self.warnings.show_warnings(fit_warnings(self._result, self._readiness, self.lag2.check),
                                        all_clear(self._readiness))

    def show_bootstrap(self, boot, result: FitResult | None = None) -> None:
        """A finished bootstrap (models.bootstrap.Bootstrap) of `result` (default: the shown
        one): the Stability tab and the bootstrap columns of the Parameters tab."""
        self.stability.show_bootstrap(boot, result=result)
        self.parameters.show_bootstrap(boot)
        self.responses.set_bootstrap(boot)
