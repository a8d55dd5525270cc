"""The exact estimator in the window: choosing it on the Dynamics page (with its night rule),
and estimating with it in the real window, which then shows the state scores.

The diary is the bundled demo (resources/demo, invented and documented there as such); the
numbers drawn must be the engine's (models.exact through models.estimate.fit).
"""

from __future__ import annotations

import numpy as np
import pytest

from window_helpers import open_window, settle

from lagwise.desktop.app import load_demo
from lagwise.desktop.export import save_widget_png
from lagwise.desktop.mainwindow import PAGES
from lagwise.desktop.pages.dynamics_page import DynamicsPage
from lagwise.models.estimators import ESTIMATORS

ESTIMATE_TIMEOUT_MS = 120_000


@pytest.fixture
def page(session, qtbot):
    widget = DynamicsPage(session)
    qtbot.addWidget(widget)
    widget.resize(1150, 820)
    widget.show()
    qtbot.waitExposed(widget)
    return widget


def choose(combo, key) -> None:
    index = combo.findData(key)
    assert index >= 0, f"{key!r} is not offered"
    combo.setCurrentIndex(index)



def test_choosing_exact_sets_the_estimator_and_explains_it(page, session, qtbot, artifacts):
    combo = page.estimator_combo
    offered = [combo.itemData(i) for i in range(combo.count())]
    assert offered == ["stationary", "first-copy-free", "exact", "continuous-time"]
    assert combo.itemText(offered.index("exact")) == "Exact (Kalman filter, whole series)"
    assert page.estimator_help.text() == ESTIMATORS["stationary"].help
    assert page.missing_combo.isEnabled() and page.depth_combo.isEnabled()
    assert not page.exact_night.isEnabled()
    choose(combo, "exact")
    settle(qtbot, 5)
    assert session.options.estimator == "exact" and session.options.night_gap is None
    assert page.estimator_help.text() == ESTIMATORS["exact"].help
    for widget in (page.missing_combo, page.depth_combo):      # window-only settings
        assert not widget.isEnabled()
        assert "exact estimator" in widget.toolTip() and "no lag windows" in widget.toolTip()
    assert page.exact_night.isEnabled() and page.restart_radio.isChecked()
    save_widget_png(page, artifacts / "dynamics-exact.png", 1.0)
    session.undo_stack.undo()
    settle(qtbot, 5)
    assert session.options.estimator == "stationary" and page.missing_combo.isEnabled()


def test_night_rule_sets_the_night_gap_and_is_undoable(page, session, qtbot):
    choose(page.estimator_combo, "exact")
    settle(qtbot, 5)
    page.night_gap_spin.setValue(4)           # not yet carried over: nothing changes
    assert session.options.night_gap is None
    page.carry_radio.click()
    settle(qtbot, 5)
    assert session.options.night_gap == 4 and session.options.estimator == "exact"
    page.night_gap_spin.setValue(7)
    settle(qtbot, 5)
    assert session.options.night_gap == 7
    session.undo_stack.undo()
    settle(qtbot, 5)
    assert session.options.night_gap == 4 and page.night_gap_spin.value() == 4
    page.restart_radio.click()
    settle(qtbot, 5)
    assert session.options.night_gap is None and page.restart_radio.isChecked()
    page.carry_radio.click()
    settle(qtbot, 5)
    assert session.options.night_gap == 4
    choose(page.estimator_combo, "stationary")  # a window estimator drops the exact-only rule
    settle(qtbot, 5)
    assert session.options.estimator == "stationary" and session.options.night_gap is None
    assert not page.exact_night.isEnabled() and not page.carry_radio.isChecked()


def test_joined_days_are_separated_by_a_night_rule_in_one_step(page, session, qtbot):
    days = session.diary.n_days
    page.night_check.click()                   # windows may span nights: one segment
    settle(qtbot, 5)
    assert np.unique(session.diary.segment).size == 1
    choose(page.estimator_combo, "exact")
    settle(qtbot, 5)
    assert not page.night_check.isEnabled()
    assert not page.restart_radio.isChecked() and not page.carry_radio.isChecked()
    assert "joined into one run" in page.exact_night_note.text()
    page.carry_radio.click()
    settle(qtbot, 5)
    assert session.import_settings.time.days_independent
    assert np.unique(session.diary.segment).size == days
    assert session.options.night_gap == page.night_gap_spin.value()
    session.undo_stack.undo()                  # one undo step for both
    settle(qtbot, 5)
    assert np.unique(session.diary.segment).size == 1
    assert session.options.night_gap is None and session.options.estimator == "exact"


def test_window_length_is_a_window_setting(page, session, qtbot):
    assert page.depth_combo.currentData() is None
    choose(page.depth_combo, 3)
    settle(qtbot, 5)
    assert session.options.depth == 3
    assert page.depth_combo.currentText() == "window of 4 prompts"
    page.lag2.click()                          # lag order 2: the default window follows it
    settle(qtbot, 5)
    assert page.depth_combo.itemText(0) == "window of 3 prompts (as the lag order)"
    assert page.depth_combo.currentData() == 3


# ----- estimating with the exact estimator in the real window --------------------------------
@pytest.fixture
def window(qtbot, lagwise_app):
    win = open_window(qtbot)
    yield win
    win.worker.wait()
    settle(qtbot, 5)


def test_exact_estimate_shows_the_state_scores(qtbot, window, artifacts):
    load_demo(window.session)
    settle(qtbot, 5)
    window.show_page(PAGES.index("Dynamics"))
    choose(window.dynamics_page.estimator_combo, "exact")
    settle(qtbot, 5)
    assert window.session.options.estimator == "exact"
    window.estimate_action.trigger()
    qtbot.waitUntil(lambda: not window.worker.busy and window.session.result is not None,
                    timeout=ESTIMATE_TIMEOUT_MS)
    settle(qtbot, 20)
    result = window.session.result
    assert result.estimator == "exact"
    results = window.results
    results.tabs.setCurrentWidget(results.state_scores)
    settle(qtbot, 20)
    panel = results.state_scores
    assert panel.has_scores
    smoothed = np.array(result.extras["state_scores"]["smoothed"])
    assert smoothed.shape == (window.session.diary.n_occasions, result.spec.k)
    assert list(panel.curves) == list(result.spec.state_names)
    for j, state in enumerate(result.spec.state_names):
        np.testing.assert_array_equal(panel.curves[state].getData()[1], smoothed[:, j])
    # the window gives the view its diary: days and missed prompts are those of the estimate
    assert "diary has changed" not in panel.note.text()
    assert save_widget_png(window, artifacts / "page-results-state-scores-exact.png", 1.0)
    results.tabs.setCurrentWidget(results.lag2)
    settle(qtbot, 20)
    assert results.lag2.run_button.isEnabled()
