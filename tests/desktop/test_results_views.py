"""The results views show the engine's numbers, draw the paths it estimated, and export.

Every check uses a real fit of the bundled demo diary (resources/demo, simulated and
documented there as invented) by models.estimate.fit: the numbers compared are the
engine's, never invented values. Display text is read through each view's Qt model,
exactly as the table shows it.
"""

from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np
import pytest
from PySide6.QtCore import QPointF, Qt
from PySide6.QtGui import QColor, QImage, QTextDocument
from PySide6.QtWidgets import QGraphicsPolygonItem

from lagwise.desktop.results import ResultsView
from lagwise.desktop.results.parameters import Group, parameter_name
from lagwise.models.numbers import fmt
from lagwise.desktop.results.widgets import save
from lagwise.desktop.results.palette import sign_color
from lagwise.desktop.style import NEGATIVE, POSITIVE
from lagwise.models.results import CAUTION_IDIOGRAPHIC, CAUTION_PSEUDO
from window_helpers import shown_results
from results_fixture import demo_result, demo_variant

ARTIFACTS = Path(__file__).resolve().parents[2] / "test-artifacts"
DISPLAY = Qt.ItemDataRole.DisplayRole



def cell(model, row: int, header: str) -> str:
    headers = [model.headerData(c, Qt.Orientation.Horizontal, DISPLAY) for c in range(model.columnCount())]
    return model.data(model.index(row, headers.index(header)), DISPLAY)


def expected_row(p) -> dict[str, str]:
    """The engine's numbers of one parameter, formatted (95% interval: estimate +- 1.96 SE)."""
    ci = p.ci
    return {"Estimate": fmt(p.estimate), "Standardized": fmt(p.standardized), "SE": fmt(p.se),
            "95% low": fmt(None if ci is None else ci[0]), "95% high": fmt(None if ci is None else ci[1])}


@pytest.fixture
def view(lagwise_app, qtbot):
    return shown_results(qtbot, demo_result())


# ----- the one number format ----------------------------------------------------------------
def test_format_matches_python_fixed_point_and_p_convention():
    # Reference: Python's own fixed-point formatting ("{:.3f}"); p-values in the common
    # reporting convention (no leading zero, "<.001" below .001: common practice).
    for x in (0.0, 1.0, -0.4567, 12.34449, 21329.94791625058, 3.0005):
        assert fmt(x) == f"{x:.3f}"
    assert fmt(-0.0001) == "0.000"
    assert fmt(np.float64(0.78671)) == "0.787"
    assert fmt(None) == fmt(float("nan")) == fmt(math.inf) == "—"
    assert fmt(0.0004, "p") == "<.001"
    assert fmt(0.001, "p") == ".001"
    assert fmt(0.0456, "p") == ".046"
    assert fmt(1.0, "p") == "1.000"
    assert fmt(153, "int") == "153"


# ----- every table shows the engine's numbers -------------------------------------------------
def test_loadings_table_shows_engine_numbers(view):
    result = demo_result()
    model = view.measurement.loadings
    expected_rows = [(s.name, it) for s in result.spec.states for it in s.items]
    assert model.rowCount() == len(expected_rows)
    for row, (state, item) in enumerate(expected_rows):
        assert (cell(model, row, "State"), cell(model, row, "Item")) == (state, item)
        p = result.get("loading", state, item)
        for header, text in expected_row(p).items():
            assert cell(model, row, header) == text, (state, item, header)
        assert cell(model, row, "R²") == fmt(result.r_squared[result.items.index(item)])
        if not p.free:
            assert cell(model, row, "SE") == "—" and "fixed" in cell(model, row, "Note")


def test_parameter_table_shows_every_engine_parameter(view):
    result = demo_result()
    model = view.parameters.proxy
    groups = [r for r in range(model.rowCount()) if isinstance(view.parameters.model.row_record(r), Group)]
    assert model.rowCount() == len(result.parameters) + len(groups)
    by_name = {parameter_name(p): p for p in result.parameters}
    seen = set()
    for row in range(model.rowCount()):
        if row in groups:
            continue
        p = by_name[cell(model, row, "Parameter")]
        seen.add((p.kind, p.from_, p.to))
        ci = p.ci
        assert cell(model, row, "Value") == fmt(p.estimate) + ("" if p.free else " (fixed)")
        assert cell(model, row, "In SD units") == fmt(p.standardized)
        assert cell(model, row, "± SE") == fmt(p.se)
        assert cell(model, row, "95% range") == ("—" if ci is None else f"[{fmt(ci[0])}, {fmt(ci[1])}]")
        assert cell(model, row, "p") == fmt(p.p, "p")
    assert len(seen) == len(result.parameters)


def test_parameter_table_filters_by_kind_and_name(view):
    result = demo_result()
    panel = view.parameters
    panel.kind_box.setCurrentIndex(panel.kind_box.findData("cross_lagged"))
    assert panel.proxy.rowCount() == len(result.table("cross_lagged")) + 1   # with its group header
    panel.search.setText("ENERGY")
    expected = [p for p in result.table("cross_lagged") if "energy" in (p.from_, p.to)]
    assert panel.proxy.rowCount() == len(expected) + 1 > 1


def test_dynamics_table_lists_free_lagged_paths(view):
    result = demo_result()
    model = view.dynamics.paths
    free = [p for p in result.parameters if p.kind in ("inertia", "cross_lagged") and p.free]
    assert model.rowCount() == len(free)
    for row in range(model.rowCount()):
        kind = "inertia" if cell(model, row, "Kind") == "Inertia" else "cross_lagged"
        p = result.get(kind, cell(model, row, "From"), cell(model, row, "To"))
        assert p.free
        for header, text in expected_row(p).items():
            assert cell(model, row, header) == text
        assert cell(model, row, "p") == fmt(p.p, "p")


def test_innovation_matrices_show_engine_correlations(view):
    result = demo_result()
    for model, matrix in ((view.innovations.correlation, result.innovation_correlation()),
                          (view.innovations.partial, result.innovation_partial_correlation())):
        k = len(result.states)
        assert (model.rowCount(), model.columnCount()) == (k, k)
        for i in range(k):
            assert model.headerData(i, Qt.Orientation.Horizontal, DISPLAY) == result.states[i]
            assert model.headerData(i, Qt.Orientation.Vertical, DISPLAY) == result.states[i]
            for j in range(k):
                assert model.data(model.index(i, j), DISPLAY) == fmt(matrix[i, j])


def test_fit_table_shows_engine_indices_grouped(view):
    result = demo_result()
    f = result.fit
    s = f.scaled   # the calibrated test of the window estimators, shown first in its group
    expected = [
        ("Exact-fit test", ""),
        ("Calibrated chi-square", fmt(s.chi2)), ("Calibrated df", fmt(s.df)),
        ("Calibrated p", fmt(s.p, "p")),
        ("Chi-square", fmt(f.chi2)), ("Degrees of freedom (df)", str(f.df)),
        ("p (chi-square)", fmt(f.p, "p")),
        ("Approximate fit", ""),
        ("Calibrated RMSEA", fmt(s.rmsea)), ("Calibrated CFI", fmt(s.cfi)),
        ("Calibrated TLI", fmt(s.tli)),
        ("RMSEA", fmt(f.rmsea)), ("RMSEA 90% interval, low", fmt(f.rmsea_ci[0])),
        ("RMSEA 90% interval, high", fmt(f.rmsea_ci[1])), ("p (RMSEA ≤ .05)", fmt(f.rmsea_pclose, "p")),
        ("CFI", fmt(f.cfi)), ("TLI", fmt(f.tli)), ("SRMR", fmt(f.srmr)),
        ("For comparing models", ""),
        ("Log-likelihood", fmt(f.loglik)), ("AIC", fmt(f.aic)), ("BIC", fmt(f.bic)),
        ("The estimate", ""),
        ("Free parameters", str(f.n_free)), ("Lag windows", str(result.n_windows)),
        ("Prompts (occasions)", str(result.n_occasions)),
        ("Spectral radius of the lagged paths", fmt(result.spectral_radius)),
    ]
    model = view.fit.figures
    shown = [(cell(model, r, "Measure"), cell(model, r, "Value")) for r in range(model.rowCount())]
    assert shown == expected
    assert not view.fit.not_applicable.isVisible()
    guide = view.fit.guide.text()
    assert ".06" in guide and ".95" in guide and ".08" in guide and "not laws" in guide


def test_cautions_are_in_the_caution_line(view):
    result = demo_result()
    document = QTextDocument()
    document.setHtml(view.caution.details.text())
    text = " ".join(document.toPlainText().split())
    for caution in result.cautions:
        assert " ".join(caution.split()) in text
    assert CAUTION_IDIOGRAPHIC in result.cautions and CAUTION_PSEUDO in result.cautions


def test_flags_are_shown_in_the_warnings_strip(lagwise_app, qtbot):
    result = demo_variant()
    assert result.flags, "the variant with 42 parameters on 167 windows is flagged by the engine"
    widget = ResultsView()
    qtbot.addWidget(widget)
    widget.show_result(result)
    document = QTextDocument()
    document.setHtml(widget.warnings.details.text())
    for flag in result.flags:
        assert " ".join(flag.split()) in " ".join(document.toPlainText().split())
    assert [w.code for w in widget.warnings.warnings] == [flag.code for flag in result.flags]


# ----- the diagrams --------------------------------------------------------------------------
def assert_sign_style(item, value: float) -> None:
    """Teal and solid, or orange and dashed; a faint path (interval includes 0) in a light
    version of the same colour (tests/desktop/test_diagram_look.py checks the faint look)."""
    pen = item.pen()
    if value >= 0:
        assert pen.color() == sign_color(value, item.link.firm) and pen.style() == Qt.PenStyle.SolidLine
    else:
        assert pen.color() == sign_color(value, item.link.firm) and pen.style() != Qt.PenStyle.SolidLine
    assert sign_color(value) == QColor(POSITIVE if value >= 0 else NEGATIVE)


def test_dynamics_diagram_has_one_arrow_per_free_cross_lagged_path(view):
    result = demo_result()
    scene = view.dynamics.scene
    free = {(p.from_, p.to): p for p in result.table("cross_lagged") if p.free}
    arrows = scene.arrows()
    assert sorted((a.link.source, a.link.target) for a in arrows) == sorted(free)
    signs = set()
    for arrow in arrows:
        p = free[(arrow.link.source, arrow.link.target)]
        assert_sign_style(arrow, p.estimate)
        signs.add(p.estimate >= 0)
        assert arrow.label_item.childItems()[0].text() == fmt(p.standardized)
        tip = arrow.toolTip()
        for text in (fmt(p.estimate), fmt(p.standardized), fmt(p.se), fmt(p.ci[0]), fmt(p.ci[1])):
            assert text in tip
    assert signs == {True, False}, "the demo has positive and negative cross-lagged effects"
    widths = sorted((abs(free[(a.link.source, a.link.target)].standardized), a.pen().widthF()) for a in arrows)
    assert [w for _, w in widths] == sorted(w for _, w in widths)
    loops = [i for i in scene.link_items() if i.link.source == i.link.target]
    inertia = [p for p in result.table("inertia") if p.free]
    assert sorted(i.link.source for i in loops) == sorted(p.to for p in inertia)
    for loop in loops:
        assert_sign_style(loop, result.get("inertia", loop.link.source, loop.link.source).estimate)


def test_paths_both_ways_are_curved_and_lag_two_is_drawn(lagwise_app, qtbot):
    result = demo_variant()
    widget = ResultsView()
    qtbot.addWidget(widget)
    widget.show_result(result)
    qtbot.waitUntil(lambda: not widget.filling)
    arrows = widget.dynamics.scene.arrows()
    assert len(arrows) == sum(p.free for p in result.table("cross_lagged")) == 6
    for arrow in arrows:
        path = arrow.path()
        start, end = path.elementAt(0), path.elementAt(path.elementCount() - 1)
        middle = path.pointAtPercent(0.5)
        chord_middle = QPointF((start.x + end.x) / 2, (start.y + end.y) / 2)
        assert (middle - chord_middle).manhattanLength() > 10, "paths both ways are curved apart"
    widget.dynamics.lag_box.setCurrentIndex(widget.dynamics.lag_box.findData(2))
    loops = widget.dynamics.scene.link_items()
    lag2 = [p for p in result.table("lag2") if p.free]
    assert sorted((i.link.source, i.link.target) for i in loops) == sorted((p.from_, p.to) for p in lag2)
    assert widget.dynamics.paths.rowCount() == len(lag2)


def test_innovation_diagram_links_every_pair_with_engine_values(view):
    result = demo_result()
    panel = view.innovations
    for which, matrix in (("correlation", result.innovation_correlation()),
                          ("partial", result.innovation_partial_correlation())):
        panel.view_box.setCurrentIndex(panel.view_box.findData(which))
        links = panel.scene.link_items()
        states = list(result.states)
        assert len(links) == len(states) * (len(states) - 1) // 2
        for item in links:
            value = matrix[states.index(item.link.source), states.index(item.link.target)]
            assert item.link.label == fmt(value)
            assert not item.link.directed
            assert not any(isinstance(c, QGraphicsPolygonItem) for c in item.childItems())  # no arrowhead
            assert_sign_style(item, value)


# ----- export and pictures -----------------------------------------------------------------------
def test_every_picture_and_table_exports(view, tmp_path):
    for panel in view.panels():
        for label, picture in panel.pictures().items():
            name = f"{panel.name}-{label}".replace(" ", "-")
            png = save(picture, tmp_path / f"{name}.png")
            image = QImage(str(png))
            assert not image.isNull() and image.width() > 200 and image.height() > 150
            svg = save(picture, tmp_path / f"{name}.svg")
            text = svg.read_text(encoding="utf-8")
            assert "<svg" in text and len(text) > 1000
        for label, model in panel.tables().items():
            path = save(model, tmp_path / f"{panel.name}-{label}.csv".replace(" ", "-"))
            with path.open(encoding="utf-8", newline="") as handle:
                rows = list(csv.reader(handle))
            assert len(rows) == model.rowCount() + 1 > 1
            assert rows[0] == [model.headerData(c, Qt.Orientation.Horizontal, DISPLAY)
                               for c in range(model.columnCount())]
            assert rows[1] == [model.data(model.index(0, c), DISPLAY) for c in range(model.columnCount())]
    assert {p.name for p in view.panels() if p.pictures()} == {"measurement", "dynamics", "innovations"}
    assert all(p.tables() for p in view.panels())


def test_empty_state_and_back(lagwise_app, qtbot):
    widget = ResultsView()
    qtbot.addWidget(widget)
    widget.show_result(None)
    assert widget.stack.currentWidget() is widget.empty_page and "No results yet" in widget.empty.text()
    widget.show_result(demo_result())
    assert widget.stack.currentWidget() is widget.tabs and widget.result is demo_result()
    widget.show_result(None)
    assert widget.stack.currentWidget() is widget.empty_page and widget.result is None


def test_render_each_tab_to_png(view, lagwise_app, qtbot):
    ARTIFACTS.mkdir(exist_ok=True)
    names = [view.tabs.tabText(i) for i in range(view.tabs.count())]
    assert names == ["Measurement", "Dynamics", "Responses", "Innovations", "Fit", "Parameters",
                     "State scores", "Lag-2 check", "Stability", "Runs", "Compare"]
    for index, name in enumerate(names):
        view.tabs.setCurrentIndex(index)
        qtbot.wait(20)
        path = ARTIFACTS / f"results-{name.lower()}.png"
        assert view.grab().save(str(path))
        image = QImage(str(path))
        assert image.width() >= 1200 and image.height() >= 800
    variant = ResultsView()
    qtbot.addWidget(variant)
    variant.resize(1280, 820)
    variant.show()
    variant.show_result(demo_variant())
    variant.tabs.setCurrentWidget(variant.dynamics)
    qtbot.wait(20)
    assert variant.grab().save(str(ARTIFACTS / "results-dynamics-all-paths.png"))
    variant.dynamics.lag_box.setCurrentIndex(variant.dynamics.lag_box.findData(2))
    qtbot.wait(20)
    assert variant.grab().save(str(ARTIFACTS / "results-dynamics-lag2.png"))
    variant.tabs.setCurrentWidget(variant.fit)
    qtbot.wait(20)
    assert variant.grab().save(str(ARTIFACTS / "results-fit-flagged.png"))
    empty = ResultsView()
    qtbot.addWidget(empty)
    empty.resize(1280, 820)
    empty.show_result(None)
    assert empty.grab().save(str(ARTIFACTS / "results-empty.png"))
