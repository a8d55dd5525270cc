"""A continuous-time result in the results views: the Dynamics tab draws the drift and each
state's own effect over intervals with its band (the engine's numbers, models.ctresults), the
Parameters tab lists drift and diffusion, and a later discrete result gets its inertia chart
back. The fit is a real one of the bundled demo diary (invented, resources/demo) with its
prompts taken as 2 hours apart."""

from __future__ import annotations

from functools import cache

import numpy as np
import pytest
from PySide6.QtCore import Qt

from lagwise.desktop.results.parameters import parameter_name
from lagwise.models.ctresults import effects_by_interval
from lagwise.models.estimate import fit
from lagwise.models.estimators import FitOptions
from lagwise.models.kinds import Kind
from lagwise.models.numbers import fmt
from results_fixture import demo_diary, demo_result, demo_spec
from window_helpers import shown_results

DISPLAY = Qt.ItemDataRole.DisplayRole


@cache
def continuous_result():
    return fit(demo_diary(), demo_spec(), FitOptions(estimator="continuous-time",
                                                     prompt_spacing=2.0))


@pytest.fixture
def view(lagwise_app, qtbot):
    return shown_results(qtbot, continuous_result())


def test_dynamics_tab_draws_each_states_own_effect_over_intervals_with_bands(view):
    result = continuous_result()
    effects = effects_by_interval(result)
    plot = view.dynamics.chart.getPlotItem()
    curves = [item for item in plot.listDataItems() if item.name()]
    assert [c.name() for c in curves] == list(result.states)
    for i, curve in enumerate(curves):
        x, y = curve.getData()
        np.testing.assert_array_equal(x, effects.intervals)
        np.testing.assert_array_equal(y, effects.values[:, i, i])
    bands = [item for item in plot.items if type(item).__name__ == "FillBetweenItem"]
    assert len(bands) == len(result.states)


def test_the_effects_of_one_state_on_the_others_over_intervals(view):
    # B(D) = expm(A D), entry [to, from]: the engine's effects_by_interval, drawn per target
    result = continuous_result()
    effects = effects_by_interval(result)
    states = list(result.states)
    box = view.dynamics.effect_box
    assert box.isVisibleTo(view.dynamics)
    box.setCurrentIndex(box.findData(states[0]))
    plot = view.dynamics.chart.getPlotItem()
    curves = [item for item in plot.listDataItems() if item.name()]
    assert [c.name() for c in curves] == [f"on {s}" for s in states[1:]]
    for to, curve in zip(range(1, len(states)), curves):
        np.testing.assert_array_equal(curve.getData()[1], effects.values[:, to, 0])
    bands = [item for item in plot.items if type(item).__name__ == "FillBetweenItem"]
    assert len(bands) == len(states) - 1
    assert "Effects of" in plot.titleLabel.text


def test_dynamics_table_lists_the_free_drift(view):
    result = continuous_result()
    model = view.dynamics.paths
    free = [p for p in result.table(Kind.DRIFT) if p.free]
    assert model.rowCount() == len(free) > 0
    headers = [model.headerData(c, Qt.Orientation.Horizontal, DISPLAY) for c in range(model.columnCount())]
    shown = {(model.data(model.index(r, headers.index("From")), DISPLAY),
              model.data(model.index(r, headers.index("To")), DISPLAY),
              model.data(model.index(r, headers.index("Estimate")), DISPLAY))
             for r in range(model.rowCount())}
    assert shown == {(p.from_, p.to, fmt(p.estimate)) for p in free}


def test_parameters_tab_names_drift_and_diffusion(view):
    result = continuous_result()
    model = view.parameters.proxy
    names = {model.data(model.index(r, 0), DISPLAY) for r in range(model.rowCount())}
    for p in result.table(Kind.DRIFT) + result.table(Kind.DIFFUSION):
        assert parameter_name(p) in names


def test_a_discrete_result_afterwards_gets_its_inertia_chart_back(view, qtbot):
    view.show_result(demo_result())
    qtbot.waitUntil(lambda: not view.filling)
    plot = view.dynamics.chart.getPlotItem()
    assert plot.legend is None and not view.dynamics.effect_box.isVisibleTo(view.dynamics)
    assert "Inertia" in plot.titleLabel.text


# ----- choosing the estimator in the window -------------------------------------------------
def test_dynamics_page_takes_the_continuous_time_settings(session, qtbot):
    from lagwise.desktop.pages.dynamics_page import DynamicsPage
    from window_helpers import settle

    page = DynamicsPage(session)
    qtbot.addWidget(page)
    page.show()
    combo = page.estimator_combo
    combo.setCurrentIndex(combo.findData("continuous-time"))
    settle(qtbot, 5)
    assert session.options.estimator == "continuous-time"
    assert page.ct_box.isEnabled() and not page.exact_night.isEnabled()
    # the demo has day and prompt numbers: a spacing is stated, the night cannot carry
    assert page.spacing_spin.isEnabled() and not page.ct_carry_check.isEnabled()
    page.spacing_spin.setValue(1.5)
    settle(qtbot, 5)
    page.unit_combo.setCurrentIndex(page.unit_combo.findData("minutes"))
    settle(qtbot, 5)
    assert (session.options.prompt_spacing, session.options.interval_unit) == (1.5, "minutes")
    session.undo_stack.undo()
    settle(qtbot, 5)
    assert session.options.interval_unit in (None, "hours")
    combo.setCurrentIndex(combo.findData("exact"))
    settle(qtbot, 5)
    assert not page.ct_box.isEnabled() and session.options.prompt_spacing is None


def test_the_window_estimates_in_continuous_time(qtbot, lagwise_app):
    from lagwise.desktop.app import load_demo
    from lagwise.desktop.mainwindow import PAGES
    from window_helpers import open_window, settle

    window = open_window(qtbot)
    load_demo(window.session)
    settle(qtbot, 5)
    window.show_page(PAGES.index("Dynamics"))
    page = window.dynamics_page
    page.estimator_combo.setCurrentIndex(page.estimator_combo.findData("continuous-time"))
    page.spacing_spin.setValue(2.0)
    settle(qtbot, 5)
    window.estimate_action.trigger()
    qtbot.waitUntil(lambda: not window.worker.busy and window.session.result is not None,
                    timeout=120_000)
    settle(qtbot, 20)
    result = window.session.result
    assert result.estimator == "continuous-time" and result.continuous.median_interval == 2.0
    curves = [i for i in window.results.dynamics.chart.getPlotItem().listDataItems() if i.name()]
    assert [c.name() for c in curves] == list(result.states)
    window.worker.wait()
