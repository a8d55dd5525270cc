"""Innovations tab: how the states' unexpected changes go together at the same prompt.

Correlations of the innovations (Psi scaled to unit diagonal) and partial correlations (the
standardised negative inverse of Psi), both from FitResult, as matrices and as an undirected
diagram with the results colour and line conventions.
"""

from __future__ import annotations

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QComboBox, QHeaderView, QLabel, QSplitter, QVBoxLayout, QWidget

from lagwise.desktop.results.diagram import DiagramScene, DiagramView, Link, Node
from lagwise.desktop.results.tables import MatrixModel, parameter_tooltip
from lagwise.models.numbers import fmt
from lagwise.desktop.results.widgets import ResultsPanel, fit_height, note_label, section_label, table_view
from lagwise.models.results import FitResult, Parameter

VIEWS = {"correlation": "Correlations", "partial": "Partial correlations"}


def _parameter(result: FitResult, kind: str, a: str, b: str) -> Parameter | None:
    for first, second in ((a, b), (b, a)):
        try:
            return result.get(kind, first, second)
        except KeyError:
            continue
    return None


def _fixed_pairs(result: FitResult, which: str) -> set[frozenset[str]]:
    """Pairs the specification fixes at 0 in the chosen view."""
    states = result.states
    if result.spec.innovations == "independent":
        return {frozenset((a, b)) for a in states for b in states if a != b}
    if which == "partial" and result.spec.innovations == "partial":
        return {frozenset(z) for z in result.spec.partial_zeros}
    return set()


def innovation_links(result: FitResult, which: str = "correlation") -> list[Link]:
    """One undirected Link per pair of states not fixed at 0 by the specification."""
    corr = result.innovation_correlation()
    partial = result.innovation_partial_correlation()
    matrix = corr if which == "correlation" else partial
    fixed = _fixed_pairs(result, which)
    states = result.states
    links = []
    for i, a in enumerate(states):
        for j in range(i + 1, len(states)):
            b = states[j]
            if frozenset((a, b)) in fixed:
                continue
            lines = [f"Innovations of {a} and {b}", f"Correlation: {fmt(corr[i, j])}",
                     f"Partial correlation: {fmt(partial[i, j])}"]
            estimated = [(_parameter(result, kind, a, b), words) for kind, words in
                         (("innovation", "Innovation covariance"), ("partial_correlation", "Partial correlation"))]
            for parameter, words in estimated:
                if parameter is not None:
                    lines += ["", parameter_tooltip(f"{words} (engine estimate)", parameter)]
            value = float(matrix[i, j])
            own = estimated[1][0] if which == "partial" and estimated[1][0] is not None else estimated[0][0]
            links.append(Link(a, b, value, value, fmt(value), "\n".join(lines), directed=False,
                              parameter=own))
    return links


class InnovationsPanel(ResultsPanel):
    """Matrices on the left, the undirected diagram on the right."""

    name = "innovations"

    def __init__(self, parent=None):
        super().__init__("Innovations: how the states move together at the same prompt", parent)
        self._result: FitResult | None = None
        self.view_box = QComboBox()
        for key, words in VIEWS.items():
            self.view_box.addItem(words, key)
        self.view_box.setToolTip("Which association the diagram shows")
        self.view_box.currentIndexChanged.connect(self._redraw)
        index = self.head.indexOf(self.export_button)
        self.head.insertWidget(index, QLabel("Diagram"))
        self.head.insertWidget(index + 1, self.view_box)
        self.head.insertSpacing(index + 2, 12)

        self.correlation = MatrixModel(self)
        self.partial = MatrixModel(self)
        left = QWidget()
        column = QVBoxLayout(left)
        column.setContentsMargins(0, 0, 0, 0)
        self.correlation_view = _matrix_view(self.correlation)
        self.partial_view = _matrix_view(self.partial)
        heading = section_label("Correlations of the innovations")
        heading.setToolTip("Each covariance of two innovations divided by the innovations' own "
                           "SDs. The Parameters tab's 'In SD units' divides the same covariance "
                           "by the SDs of the states, which are larger: a smaller number.")
        column.addWidget(heading)
        column.addWidget(self.correlation_view)
        column.addSpacing(6)
        column.addWidget(section_label("Partial correlations (each pair given the other states)"))
        column.addWidget(self.partial_view)
        column.addSpacing(6)
        self.note = note_label()
        column.addWidget(self.note)
        column.addStretch(1)

        self.scene = DiagramScene(self)
        self.diagram_view = DiagramView(self.scene)
        split = QSplitter(Qt.Orientation.Horizontal)
        split.addWidget(left)
        split.addWidget(self.diagram_view)
        split.setSizes([440, 820])
        self.body.addWidget(split)

    def show_result(self, result: FitResult) -> None:
        self._result = result
        self.correlation.set_matrix(result.innovation_correlation(), result.states)
        self.partial.set_matrix(result.innovation_partial_correlation(), result.states)
        for view in (self.correlation_view, self.partial_view):
            fit_height(view)
        form = {"free": "All innovation covariances are free.",
                "independent": "The innovations are independent in this model (all correlations fixed at 0).",
                "partial": "The innovations are modelled through partial correlations"
                           + (", some fixed at 0." if result.spec.partial_zeros else ".")}
        self.note.setText(
            "An innovation is the part of a state at a prompt that the earlier prompts do not "
            "predict. " + form.get(result.spec.innovations, "")
            + " Partial correlations take the other states into account.")
        self._redraw()

    def _redraw(self) -> None:
        result = self._result
        if result is None:
            return
        which = self.view_box.currentData()
        links = innovation_links(result, which)
        variances = {s: result.innovation[i, i] for i, s in enumerate(result.states)}
        nodes = [Node(s, f"variance {fmt(variances[s])}", f"Innovation variance of {s}: {fmt(variances[s])}")
                 for s in result.states]
        words = "correlations" if which == "correlation" else "partial correlations"
        message = "" if links else "No associations between innovations are free in this model."
        self.scene.draw(nodes, links, title=f"Innovation {words}",
                        legend=[f"Lines: {words} between the states' innovations (no direction). "
                                "Inside each circle: the innovation variance."],
                        message=message, width_words="width by size:",
                        hint="Hover over a line for both correlations and the estimate with its SE.")

    def pictures(self) -> dict:
        return {"diagram": self.scene}

    def tables(self) -> dict:
        return {"correlations": self.correlation, "partial correlations": self.partial}


def _matrix_view(model: MatrixModel):
    view = table_view(model)
    view.verticalHeader().setVisible(True)
    view.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Stretch)
    view.setAlternatingRowColors(False)
    view.setSelectionMode(view.SelectionMode.NoSelection)
    return view
