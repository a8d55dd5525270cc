"""Every diary is screened off the UI thread: the screening view hands it to its worker,
shows progress, and then shows what models.screening computes for the same diary."""

from __future__ import annotations

import threading

from lagwise.desktop.pages.screening_view import ScreeningView
from lagwise.models.diary import TimeSettings
from lagwise.models.preparation import Step, apply_steps
from lagwise.models.recipe import load_diary
from lagwise.models.screening import screen_diary
from lagwise.resources import demo_diary_path


def test_diary_is_screened_in_the_worker(lagwise_app, qtbot, screening_threads):
    demo = load_diary(demo_diary_path(), time=TimeSettings(mode="grid", day="day",
                                                           prompt="prompt"))
    view = ScreeningView()
    qtbot.addWidget(view)
    steps = (Step("detrend"),)
    view.set_diary(demo, steps)
    assert view.busy and view.screening() is None
    qtbot.waitUntil(lambda: not view.busy and view.screening() is not None, timeout=60_000)
    assert len(screening_threads) == 2
    assert all(t is not threading.main_thread() for t in screening_threads)
    before, after = screen_diary(demo), screen_diary(apply_steps(demo, steps))
    for shown, computed in ((view.screening(), before), (view.screening(prepared=True), after)):
        assert [s.adf.p for s in shown.items] == [s.adf.p for s in computed.items]
        assert [s.kpss.p for s in shown.items] == [s.kpss.p for s in computed.items]
        assert shown.readiness == computed.readiness
    assert view.progress_label.isHidden()
