"""The lag-2 check in the window: the tab's Run button starts models.lag2check.lag2_check
in the worker (progress and Cancel in the status bar, like Estimate), the finished check is
shown, and adopting an indicated path is one undoable edit of the model.

The diary is simulated with a known lag-2 path (Tension at t-2 -> Mood at t = 0.5,
models.simulate.simulate_diary) and imported from a CSV file through the import dialog. The
numbers shown must be those of lag2_check run directly on the same diary and model.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from PySide6.QtCore import Qt

from window_helpers import import_file, open_window, settle

from lagwise.desktop.export import save_widget_png
from lagwise.desktop.mainwindow import JOB_ESTIMATE, JOB_LAG2, PAGES, MainWindow
from lagwise.models.lag2check import adopt as adopted_spec
from lagwise.models.lag2check import lag2_check
from lagwise.models.preparation import Step
from lagwise.models.simulate import simulate_diary
from lagwise.models.spec import make_spec

TIMEOUT_MS = 120_000
SPEC1 = make_spec({"Tension": ["tense", "restless", "worried"],
                   "Mood": ["cheerful", "content", "relaxed"]}, lags=1)



@pytest.fixture(scope="module")
def diary_csv(tmp_path_factory):
    b2 = np.zeros((2, 2))
    b2[1, 0] = 0.5
    diary = simulate_diary(
        SPEC1.with_lags(2),
        loadings=np.array([[1, 0], [.8, 0], [.9, 0], [0, 1], [0, .7], [0, .85]]),
        intercepts=np.zeros(6), unique=np.full(6, 0.4),
        lagged=[np.array([[0.4, 0.1], [0.0, 0.3]]), b2],
        innovation=np.array([[1.0, 0.3], [0.3, 1.0]]), days=30, prompts_per_day=10, seed=21)
    frame = pd.DataFrame({"day": diary.day + 1, "prompt": diary.prompt.astype(int)})
    for j, item in enumerate(diary.items):
        frame[item] = diary.values[:, j]
    path = tmp_path_factory.mktemp("lag2") / "lag2_diary.csv"
    frame.to_csv(path, index=False)
    return path


@pytest.fixture
def window(qtbot, lagwise_app, diary_csv, tmp_path, monkeypatch):
    monkeypatch.setenv("LAGWISE_DATA_DIR", str(tmp_path / "data"))
    win = open_window(qtbot, 1280, 860)
    import_file(qtbot, win, diary_csv)
    win.session.edit_spec(SPEC1, "Build the model")
    win.estimate_action.trigger()
    qtbot.waitUntil(lambda: not win.worker.busy and win.session.result is not None,
                    timeout=TIMEOUT_MS)
    settle(qtbot)
    win.show_page(PAGES.index("Results"))
    win.results.tabs.setCurrentWidget(win.results.lag2)
    settle(qtbot)
    yield win
    win.worker.wait()
    win.session.mark_saved(None)  # nothing to ask when the test closes it
    settle(qtbot)


def run_check(qtbot, window: MainWindow) -> None:
    lag2 = window.results.lag2
    jobs = []
    window.worker.started.connect(lambda: jobs.append(window.worker.job))
    qtbot.mouseClick(lag2.run_button, Qt.MouseButton.LeftButton)
    assert jobs == [JOB_LAG2]
    assert window.progress_label.text() == "Running the lag-2 check…"
    assert window.cancel_button.isVisible()
    qtbot.waitUntil(lambda: not window.worker.busy and lag2.check is not None, timeout=TIMEOUT_MS)
    settle(qtbot)


def test_run_show_adopt_and_undo(qtbot, window, artifacts):
    lag2 = window.results.lag2
    session = window.session
    assert lag2.check is None and lag2.run_button.isEnabled()
    run_check(qtbot, window)
    assert not window.cancel_button.isVisible()
    assert "Lag-2 check finished" in window.statusBar().currentMessage()

    snapshot = session.snapshot()                                # the same inputs, run directly
    direct = lag2_check(snapshot.diary, snapshot.spec, snapshot.options)
    shown = lag2.check
    assert shown.lr_chi2 == pytest.approx(direct.lr_chi2, rel=1e-9)
    assert shown.lr_df == direct.lr_df
    assert [(t.kind, t.from_, t.to) for t in shown.indicated] == [
        (t.kind, t.from_, t.to) for t in direct.indicated]
    assert ("lag2", "Tension", "Mood") in [(t.kind, t.from_, t.to) for t in shown.indicated]

    selected = lag2.selected_test()                               # the strongest indicated path
    assert (selected.kind, selected.from_, selected.to) == ("lag2", "Tension", "Mood")
    assert lag2.adopt_button.isEnabled()
    path = save_widget_png(window, artifacts / "window-lag2-check.png", 1.0)
    assert path.exists()

    qtbot.mouseClick(lag2.adopt_button, Qt.MouseButton.LeftButton)
    settle(qtbot)
    assert session.spec == adopted_spec(SPEC1, "lag2", "Tension", "Mood")
    assert session.spec.lags == 2 and session.spec.path_mask(2)[1, 0]
    assert session.undo_stack.undoText().startswith("Adopt lag-2 path Tension")
    assert not lag2.adopt_button.isEnabled()                      # already in the model
    assert lag2.check is shown                                    # the same lag-1 model
    assert window.isWindowModified()

    window.undo_action.trigger()
    settle(qtbot)
    assert session.spec == SPEC1
    assert lag2.adopt_button.isEnabled()                          # offered again
    window.redo_action.trigger()
    assert session.spec.lags == 2


def test_cancelling_the_check_keeps_what_was_shown(qtbot, window):
    lag2 = window.results.lag2
    window.worker.progress.connect(lambda *_: window.cancel_estimate())
    with qtbot.waitSignal(window.worker.cancelled, timeout=TIMEOUT_MS):
        qtbot.mouseClick(lag2.run_button, Qt.MouseButton.LeftButton)
    qtbot.waitUntil(lambda: not window.worker.busy, timeout=TIMEOUT_MS)
    settle(qtbot)
    assert lag2.check is None
    assert "lag-2 check stopped" in window.statusBar().currentMessage()


def test_an_estimate_started_during_the_check_replaces_it(qtbot, window):
    lag2 = window.results.lag2
    jobs = []
    window.worker.started.connect(lambda: jobs.append(window.worker.job))
    before = window.session.result
    qtbot.mouseClick(lag2.run_button, Qt.MouseButton.LeftButton)
    window.estimate_action.trigger()                             # one worker: the check stops
    qtbot.waitUntil(lambda: not window.worker.busy and window.session.result is not before,
                    timeout=TIMEOUT_MS)
    settle(qtbot)
    assert jobs == [JOB_LAG2, JOB_ESTIMATE]
    assert lag2.check is None


def test_changed_preparation_clears_the_check_as_out_of_date(qtbot, window):
    lag2 = window.results.lag2
    run_check(qtbot, window)
    window.session.set_preparation((Step("detrend"),), "Remove trends")
    assert lag2.check is None
    assert "preparation changed" in lag2.verdict.text()
    window.undo_action.trigger()
    run_check(qtbot, window)                                      # runs on the present data
    assert lag2.check is not None
