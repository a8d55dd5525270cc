"""The screening view offscreen: what it shows comes from models.screening/preparation,
ticking a step emits the steps, and every picture and table can be saved."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from PySide6.QtCore import Qt

from lagwise.desktop.export import save_scene_svg, save_table_csv, save_widget_png
from lagwise.desktop.pages.screening_view import ScreeningView
from lagwise.models.diary import TimeSettings
from lagwise.models.preparation import Step, apply_steps
from lagwise.models.screening import screen_diary
from lagwise.models.timegrid import diary_from_frame
from lagwise.models.recipe import load_diary

DEMO = "resources/demo/demo_diary.csv"
GRID = TimeSettings(mode="grid", day="day", prompt="prompt")


@pytest.fixture(scope="module")
def demo():
    from pathlib import Path

    root = Path(__file__).resolve().parents[2]
    return load_diary(root / DEMO, time=GRID)


@pytest.fixture
def view(lagwise_app, qtbot):
    widget = ScreeningView()
    qtbot.addWidget(widget)
    widget.resize(1400, 950)
    return widget


def order_diary(seed=0, n=80, constant=False):
    """A one-segment diary in file order; random draws, never check values."""
    rng = np.random.default_rng(seed)
    frame = pd.DataFrame({"calm": 0.03 * np.arange(n) + rng.normal(size=n),
                          "tense": np.full(n, 2.0) if constant else rng.normal(size=n)})
    return diary_from_frame(frame, ["calm", "tense"], TimeSettings(mode="order"))


def idle(qtbot, view):
    """Wait until the view has screened its diary (in the worker) and drawn its plots."""
    qtbot.waitUntil(lambda: not view.busy, timeout=60_000)


def column(model, header):
    headers = [model.headerData(c, Qt.Orientation.Horizontal) for c in range(model.columnCount())]
    return headers.index(header)


def test_shows_items_readiness_and_weeks(view, demo, qtbot):
    view.set_diary(demo, (), n_free=40)
    idle(qtbot, view)
    model = view.item_model
    assert model.rowCount() == demo.n_items
    assert [model.index(r, 0).data() for r in range(model.rowCount())] == list(demo.items)
    expected = screen_diary(demo, n_free=40)  # the view shows the models' numbers
    acf1 = column(model, "ACF 1")
    for r, item in enumerate(expected.items):
        assert model.index(r, acf1).data() == f"{item.acf[0]:.2f}"
    text = view.readiness_label.text()
    assert f"<b>{expected.readiness.answered}</b> of {demo.n_occasions}" in text
    assert "per free parameter" in text and "rules of thumb" in text
    assert view.week_model.rowCount() == len(expected.readiness.compliance_by_week) == 6
    assert view.checks["weekday_means"].isEnabled()  # the demo's days are dates


def test_ticking_a_step_emits_and_shows_after(view, demo, qtbot):
    view.set_diary(demo, ())
    idle(qtbot, view)
    with qtbot.waitSignal(view.steps_changed, timeout=5000) as signal:
        view.checks["standardize"].setChecked(True)
    assert signal.args == [(Step("standardize"),)]
    idle(qtbot, view)
    after = view.screening(prepared=True)
    assert all(s.sd == pytest.approx(1.0) and s.mean == pytest.approx(0.0, abs=1e-12)
               for s in after.items)
    assert column(view.item_model, "Reading after") > 0
    with qtbot.waitSignal(view.steps_changed, timeout=5000) as signal:
        view.checks["detrend"].setChecked(True)
    assert signal.args == [(Step("detrend"), Step("standardize"))]  # usual order
    assert "trend" in view.steps_label.text() and view.steps() == signal.args[0]


def test_set_diary_reflects_given_steps(view, demo, qtbot):
    steps = (Step("prompt_means"), Step("weekday_means"))
    view.set_diary(demo, steps)
    idle(qtbot, view)
    assert view.checks["prompt_means"].isChecked() and view.checks["weekday_means"].isChecked()
    assert not view.checks["detrend"].isChecked()
    prepared = screen_diary(apply_steps(demo, steps))
    shown = view.screening(prepared=True)
    assert [s.acf for s in shown.items] == [s.acf for s in prepared.items]


def test_impossible_step_is_refused_without_signal(view, qtbot):
    view.set_diary(order_diary(constant=True), ())
    idle(qtbot, view)
    assert not view.checks["weekday_means"].isEnabled()  # no dates, no timestamps
    assert not view.checks["prompt_means"].isEnabled()   # no prompt numbers
    with qtbot.assertNotEmitted(view.steps_changed):
        view.checks["standardize"].setChecked(True)
    assert not view.checks["standardize"].isChecked()
    assert "cannot be standardized" in view.steps_label.text()
    assert view.steps() == ()


def test_plot_numbers_match_the_screening(view, demo, qtbot):
    view.set_diary(demo, (Step("detrend"),))
    idle(qtbot, view)
    view.select_item("flat")
    idle(qtbot, view)
    rows = [[view.plot_model.index(r, c).data() for c in range(6)]
            for r in range(view.plot_model.rowCount())]
    item = view.screening().item("flat")
    acf = [float(r[4]) for r in rows if r[0] == "autocorrelation" and r[1] == "as answered"]
    np.testing.assert_allclose(acf, item.acf, rtol=1e-5)
    series = [r for r in rows if r[0] == "series" and r[1] == "as answered"]
    assert len(series) == item.answered
    trend = [r for r in rows if r[0] == "trend" and r[1] == "as answered"]
    ends = np.array([float(r[2]) for r in trend])
    np.testing.assert_allclose([float(r[4]) for r in trend], item.trend.line(ends), rtol=1e-5)
    after = [r for r in rows if r[0] == "trend" and r[1] == "after preparation"]
    np.testing.assert_allclose([float(r[4]) for r in after], 0.0, atol=1e-5)  # detrended


def test_exports_and_picture(view, demo, tmp_path, artifacts, qtbot):
    view.set_diary(demo, (Step("detrend"), Step("standardize")), n_free=40)
    view.show()
    idle(qtbot, view)
    view.select_item("sad")
    idle(qtbot, view)
    png = save_widget_png(view, artifacts / "screening_view.png", scale=1.0)
    assert png.stat().st_size > 20_000
    svg = save_scene_svg(view.plots, tmp_path / "plots.svg")
    assert "<svg" in svg.read_text(encoding="utf-8")[:2000]
    items = save_table_csv(view.item_model, tmp_path / "items.csv")
    table = pd.read_csv(items)
    assert list(table["Item"]) == list(demo.items)
    numbers = pd.read_csv(save_table_csv(view.plot_model, tmp_path / "plots.csv"))
    assert set(numbers["Plot"]) == {"series", "trend", "autocorrelation", "within day",
                                    "weekday"}
    weeks = pd.read_csv(save_table_csv(view.week_model, tmp_path / "weeks.csv"))
    assert weeks["Answered"].sum() == int(demo.answered.sum())


def test_empty_view(view):
    view.set_diary(None)
    assert "No diary" in view.readiness_label.text()
    assert view.item_model.rowCount() == 0
    assert not any(box.isEnabled() for box in view.checks.values())
