"""The Responses tab shows the engine's impulse responses and nothing else.

Every check uses a real fit of the bundled demo diary (resources/demo, simulated and
documented there as invented): the plotted points, the band edges, the table cells, the
half-lives and the sentences are read off the tab and compared with
models.responses.impulse_responses of the same result, written by models.numbers.fmt.
The tab is rendered to test-artifacts/ at 1280x800 and 1920x1080 in the real window.
"""

from __future__ import annotations

import csv
from dataclasses import replace
from itertools import product

import numpy as np
import pytest
from PySide6.QtCore import Qt
from PySide6.QtGui import QImage
from PySide6.QtWidgets import QApplication, QScrollArea

from lagwise.desktop.results import ResultsView
from lagwise.desktop.results import responses_view
from lagwise.desktop.results.widgets import save
from lagwise.desktop.style import NEGATIVE, POSITIVE
from lagwise.models.numbers import fmt
from lagwise.models.responses import impulse_responses
from results_fixture import demo_result, demo_variant
from window_helpers import open_window, settle

DISPLAY = Qt.ItemDataRole.DisplayRole


@pytest.fixture
def view(lagwise_app, qtbot):
    widget = ResultsView()
    qtbot.addWidget(widget)
    widget.resize(1280, 800)
    widget.show()
    widget.show_result(demo_result())
    widget.tabs.setCurrentWidget(widget.responses)
    QApplication.processEvents()
    return widget


def choose(panel, shock: int, form: str, cumulative: bool, standardized: bool) -> None:
    panel.shock_box.setCurrentIndex(shock)
    panel.form_box.setCurrentIndex(panel.form_box.findData(form))
    panel.units_box.setCurrentIndex(panel.units_box.findData("standardized" if standardized else "own"))
    panel.cumulative_box.setChecked(cumulative)


def cells(model, column: str) -> list[str]:
    headers = [model.headerData(c, Qt.Orientation.Horizontal, DISPLAY) for c in range(model.columnCount())]
    col = headers.index(column)
    return [model.data(model.index(r, col), DISPLAY) for r in range(model.rowCount())]


def plotted(panel, state: str) -> tuple[np.ndarray, np.ndarray]:
    """The points drawn in a state's plot (rises and falls together), in prompt order."""
    xs, ys = [], []
    for item in panel.points[state]:
        x, y = item.getData()
        if x is not None:
            xs.append(x)
            ys.append(y)
    x, y = np.concatenate(xs), np.concatenate(ys)
    order = np.argsort(x)
    return x[order], y[order]


def plain(label) -> str:
    from PySide6.QtGui import QTextDocument
    doc = QTextDocument()
    doc.setHtml(label.text())
    return doc.toPlainText()


# ----- where the tab sits ----------------------------------------------------------------------
def test_the_responses_tab_sits_beside_the_dynamics(view):
    names = [view.tabs.tabText(i) for i in range(view.tabs.count())]
    assert names[names.index("Dynamics") + 1] == "Responses"
    assert view.tabs.widget(names.index("Responses")) is view.responses
    panel = view.responses
    assert panel.units_box.currentData() == "standardized"          # standardized by default
    assert panel.form_box.currentData() == "unit" and not panel.cumulative_box.isChecked()
    assert panel.horizon_spin.value() == 10 and not panel.order_row.isVisible()


# ----- every number shown is the engine's ------------------------------------------------------
def test_plots_tables_and_words_show_the_engine_numbers(view):
    panel = view.responses
    result = demo_result()
    engine = impulse_responses(result, horizon=10)
    assert panel.responses.to_json() == engine.to_json()
    states = engine.states
    x = np.arange(11)
    for j, form, cumulative, standardized in product(range(len(states)), ("unit", "orthogonal"),
                                                     (False, True), (True, False)):
        choose(panel, j, form, cumulative, standardized)
        curve = engine.curve(form, cumulative, standardized)
        for i, state in enumerate(states):
            px, py = plotted(panel, state)
            np.testing.assert_array_equal(px, x)
            np.testing.assert_array_equal(py, curve.estimate[:, i, j])
            rises, falls = panel.points[state]
            assert np.all(rises.getData()[1] >= 0) and np.all(falls.getData()[1] < 0)
            assert rises.opts["brush"].color().name() == POSITIVE
            assert falls.opts["brush"].color().name() == NEGATIVE
            low, high = (item.getData()[1] for item in panel.band_edges[state])
            np.testing.assert_array_equal(low, curve.lower[:, i, j])
            np.testing.assert_array_equal(high, curve.upper[:, i, j])
        expected = [(str(h), states[i], fmt(curve.estimate[h, i, j]), fmt(curve.se[h, i, j]),
                     fmt(curve.lower[h, i, j]), fmt(curve.upper[h, i, j]))
                    for i in range(len(states)) for h in range(11)]
        shown = list(zip(*(cells(panel.numbers, c) for c in
                           ("Prompts after", "State", "Response", "SE", "Band low", "Band high"))))
        assert shown == expected
        words = plain(panel.words)
        for sentence in engine.sentences(standardized):
            assert sentence in words
    assert cells(panel.half_lives, "Half-life") == [
        str(h) if h is not None else "more than 10" for h in engine.half_life]
    assert cells(panel.half_lives, "1 prompt later") == [fmt(engine.unit[1, i, i]) for i in range(3)]
    assert all(note in panel.notes.text() for note in engine.notes)


def test_rises_are_solid_teal_and_falls_dashed_orange(view):
    panel = view.responses
    choose(panel, 0, "unit", False, False)
    engine = panel.responses
    for i, state in enumerate(engine.states):
        rise, fall = panel.rises[state], panel.falls[state]
        assert rise.opts["pen"].color().name() == POSITIVE
        assert rise.opts["pen"].style() == Qt.PenStyle.SolidLine
        assert fall.opts["pen"].color().name() == NEGATIVE
        assert fall.opts["pen"].style() == Qt.PenStyle.DashLine
        y = engine.unit[:, i, 0]
        for item, keep, any_of in ((rise, lambda v: v >= 0, y >= 0), (fall, lambda v: v <= 0, y < 0)):
            ys = item.getData()[1]
            if not np.any(any_of[:-1] | any_of[1:]):   # no segment of this sign to draw
                continue
            assert np.all(keep(ys[np.isfinite(ys)]))


def test_the_order_of_the_states_for_orthogonal_responses(view, qtbot):
    panel = view.responses
    result = demo_result()
    choose(panel, 0, "orthogonal", False, False)
    assert panel.order_row.isVisible()
    panel.order_list.setCurrentRow(0)
    qtbot.mouseClick(panel.later_button, Qt.MouseButton.LeftButton)   # tension after low mood
    order = ("low mood", "tension", "energy")
    assert panel.order == order
    engine = impulse_responses(result, horizon=10, order=order)
    assert panel.responses.order == order
    for i, state in enumerate(engine.states):
        np.testing.assert_array_equal(plotted(panel, state)[1], engine.orthogonal[:, i, 0])
    assert "low mood, tension, energy" in panel.notes.text()
    panel.set_order(("energy", "low mood", "tension"))
    engine = impulse_responses(result, horizon=10, order=("energy", "low mood", "tension"))
    np.testing.assert_array_equal(plotted(panel, "energy")[1], engine.orthogonal[:, 2, 0])


def test_switching_only_redraws_and_the_horizon_recomputes(view, monkeypatch):
    calls = []
    real = responses_view.impulse_responses

    def counted(*args, **kwargs):
        calls.append(args[1:3])
        return real(*args, **kwargs)

    monkeypatch.setattr(responses_view, "impulse_responses", counted)
    panel = view.responses
    panel.show_result(demo_result())
    assert len(calls) == 1                                     # once per result
    for j, form, cumulative, standardized in product(range(3), ("unit", "orthogonal"),
                                                     (False, True), (True, False)):
        choose(panel, j, form, cumulative, standardized)
    assert len(calls) == 1                                     # switching views: no recomputation
    panel.horizon_spin.setValue(6)
    assert calls[-1][0] == 6 and panel.numbers.rowCount() == 7 * 3
    assert plotted(panel, "tension")[0].tolist() == list(range(7))
    panel.horizon_spin.setValue(10)
    assert len(calls) == 2                                     # horizon 10 kept from before


def test_a_lag_2_partial_correlation_fit(view):
    result = demo_variant()
    view.show_result(result)
    panel = view.responses
    choose(panel, 2, "unit", True, True)
    engine = impulse_responses(result, horizon=10)
    curve = engine.curve("unit", True, True)
    for i, state in enumerate(engine.states):
        np.testing.assert_array_equal(plotted(panel, state)[1], curve.estimate[:, i, 2])
    assert cells(panel.half_lives, "Swings") == ["yes" if o else "no" for o in engine.oscillates]


def test_paths_that_are_not_stationary_offer_only_own_units(view):
    result = demo_result()
    lagged = (result.lagged[0] + 0.9 * np.eye(3),)
    view.show_result(replace(result, lagged=lagged))
    panel = view.responses
    assert not panel.units_box.model().item(panel.units_box.findData("standardized")).isEnabled()
    assert panel.units_box.currentData() == "own"
    assert "not stationary" in panel.notes.text()
    engine = panel.responses
    np.testing.assert_array_equal(plotted(panel, "tension")[1], engine.unit[:, 0, 0])


def test_bootstrap_replicates_give_percentile_bands(view):
    result = demo_result()
    rng = np.random.default_rng(1)
    estimates = np.array([p.estimate for p in result.free_parameters])
    draws = rng.multivariate_normal(estimates, result.covariance, size=200)

    class Replicates:
        pass

    Replicates.estimates = draws
    panel = view.responses
    panel.set_bootstrap(Replicates())
    engine = impulse_responses(result, horizon=10, bootstrap=Replicates())
    assert panel.responses.interval == "percentile"
    low = panel.band_edges["low mood"][0].getData()[1]
    np.testing.assert_array_equal(low, engine.curve("unit", standardized=True).lower[:, 1, 0])
    assert "bootstrap percentiles" in panel.legend.text()


# ----- export ----------------------------------------------------------------------------------
def test_every_picture_and_table_exports(view, tmp_path):
    panel = view.responses
    assert set(panel.tables()) == {"plotted responses", "responses to every rise", "half-lives"}
    for label, model in panel.tables().items():
        path = save(model, tmp_path / f"{label}.csv")
        with path.open(encoding="utf-8") as handle:
            rows = list(csv.reader(handle))
        assert rows[1:] == [[model.data(model.index(r, c), DISPLAY) for c in range(model.columnCount())]
                            for r in range(model.rowCount())]
    assert panel.all_numbers.rowCount() == 3 * 3 * 11
    for kind in ("png", "svg"):
        path = save(panel.pictures()["responses"], tmp_path / f"responses.{kind}")
        assert path.stat().st_size > 5_000
    assert QImage(str(tmp_path / "responses.png")).width() > 800


# ----- the real window, at two screen sizes ----------------------------------------------------
@pytest.mark.parametrize("size", [(1280, 800), (1920, 1080)])
def test_the_tab_reads_without_clipping_in_the_window(qtbot, lagwise_app, artifacts, size):
    win = open_window(qtbot, *size)
    results = win.results
    results.show_result(demo_result())
    win.show_page(3)
    results.tabs.setCurrentWidget(results.responses)
    panel = results.responses
    choose(panel, 1, "orthogonal", False, True)
    settle(qtbot, 20)
    path = artifacts / f"results-responses-{size[0]}x{size[1]}.png"
    assert win.grab().save(str(path))
    assert QImage(str(path)).width() == size[0]
    scroll = next(s for s in win.findChildren(QScrollArea) if s.widget() is results)
    assert scroll.verticalScrollBar().maximum() == 0 and scroll.horizontalScrollBar().maximum() == 0
    inside = panel.rect()
    for widget in (panel.shock_box, panel.units_box, panel.form_box, panel.horizon_spin,
                   panel.cumulative_box, panel.export_button, panel.order_list, panel.later_button):
        corner = widget.mapTo(panel, widget.rect().bottomRight())
        assert widget.isVisible() and inside.contains(corner), widget
    for plot in panel._plots.values():
        box = plot.vb.sceneBoundingRect()
        assert box.width() >= 150 and box.height() >= 150
    assert panel.plot_scroll.verticalScrollBar().maximum() == 0
    assert panel.side.widget().width() <= panel.side.viewport().width()   # no text cut on the right
    win.session.mark_saved(None)


def test_what_the_tab_shows_is_saved_with_the_project(qtbot, lagwise_app, tmp_path, monkeypatch):
    # The horizon, order, form, cumulative and units chosen on the tab go into the project
    # file and come back on the reopened tab (read off its controls and its table).
    from lagwise.desktop.app import load_demo

    monkeypatch.setenv("LAGWISE_DATA_DIR", str(tmp_path / "data"))
    win = open_window(qtbot, 1280, 800)
    load_demo(win.session)
    win.session.set_result(demo_result())
    settle(qtbot)
    panel = win.results.responses
    choose(panel, 0, "orthogonal", True, False)
    panel.horizon_spin.setValue(6)
    panel.order_list.setCurrentRow(0)
    qtbot.mouseClick(panel.later_button, Qt.MouseButton.LeftButton)
    chosen = panel.response_choice()
    assert chosen.horizon == 6 and chosen.form == "orthogonal" and chosen.cumulative
    assert not chosen.standardized and chosen.order[1] == demo_result().states[0]
    assert win.session.responses == chosen
    path = tmp_path / "responses.lagwise"
    assert win.files.save_to(path)
    win.session.mark_saved(None)

    again = open_window(qtbot, 1280, 800)
    assert again.files.open(path)
    settle(qtbot)
    shown = again.results.responses
    assert shown.horizon_spin.text() == "6"
    assert [shown.order_list.item(n).text() for n in range(shown.order_list.count())] == list(chosen.order)
    assert shown.form_box.currentText() == responses_view.FORMS["orthogonal"]
    assert shown.units_box.currentText() == responses_view.UNITS["own"]
    assert shown.cumulative_box.isChecked()
    assert shown.responses.order == chosen.order and shown.responses.horizon == 6
    again.session.mark_saved(None)
