"""Runs in the window: every estimate is a run in the Runs tab; delete, rename and reopen are
undoable edits of the session; Compare shows the likelihood-ratio test of a nested pair.

The diary is simulated from tests/two_state_model.py (known parameters) and imported from a
CSV file through the import dialog. The likelihood-ratio statistic read off the screen must
be 2 x the difference of the two runs' log-likelihoods (common practice), with df the
difference of their free parameters, scaled by the difference test of Satorra & Bentler
(2001), and p from scipy.stats.chi2.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pytest
from PySide6.QtCore import Qt
from scipy.stats import chi2

from two_state_model import SPEC, TRUE
from window_helpers import import_file, open_window, settle

from lagwise.desktop.export import save_table_csv
from lagwise.models.numbers import fmt
from lagwise.models.simulate import simulate_diary

TIMEOUT_MS = 120_000
# the cross-lagged path calm (t-1) -> drive (t) fixed at 0: nested in SPEC
NESTED = SPEC.with_paths(1, np.array([[True, True], [False, True]]))


@pytest.fixture(scope="module")
def diary_csv(tmp_path_factory):
    diary = simulate_diary(SPEC, **TRUE, days=40, prompts_per_day=6, p_missed=0.2, seed=8)
    frame = pd.DataFrame({"day": diary.day + 1, "prompt": diary.prompt.astype(int)})
    for j, item in enumerate(diary.items):
        frame[item] = diary.values[:, j]
    path = tmp_path_factory.mktemp("runs") / "runs_diary.csv"
    frame.to_csv(path, index=False)
    return path


def estimate(qtbot, win, spec) -> None:
    before = len(win.session.runs)
    win.session.edit_spec(spec, "Model")
    win.estimate_action.trigger()
    qtbot.waitUntil(lambda: not win.worker.busy and len(win.session.runs) == before + 1,
                    timeout=TIMEOUT_MS)
    settle(qtbot)


@pytest.fixture
def window(qtbot, lagwise_app, diary_csv, tmp_path, monkeypatch):
    monkeypatch.setenv("LAGWISE_DATA_DIR", str(tmp_path / "data"))
    win = open_window(qtbot, 1280, 800)
    import_file(qtbot, win, diary_csv)
    estimate(qtbot, win, SPEC)
    estimate(qtbot, win, NESTED)
    yield win
    win.worker.wait()
    win.session.mark_saved(None)
    settle(qtbot)


def shown_runs(panel) -> list[str]:
    model = panel.model
    return [model.data(model.index(row, 0)) for row in range(model.rowCount())]


def test_two_estimates_give_two_runs_and_the_newest_is_current(window):
    panel = window.results.runs
    assert shown_runs(panel) == ["Run 1", "Run 2"]
    assert panel.current_label.text() == "Current run: Run 2"
    assert window.results.result is window.session.runs[1].result
    assert window.session.runs[1].spec == NESTED


def test_delete_then_undo_brings_the_run_back(window, qtbot):
    panel = window.results.runs
    first = window.session.runs[0]
    panel.select("Run 1")
    qtbot.mouseClick(panel.delete_button, Qt.MouseButton.LeftButton)
    assert shown_runs(panel) == ["Run 2"]
    window.undo_action.trigger()
    assert shown_runs(panel) == ["Run 1", "Run 2"]
    assert window.session.runs[0] is first
    # deleting the current run makes the newest remaining one current
    panel.select("Run 2")
    qtbot.mouseClick(panel.delete_button, Qt.MouseButton.LeftButton)
    assert panel.current_label.text() == "Current run: Run 1"
    assert window.results.result is first.result
    window.undo_action.trigger()
    assert panel.current_label.text() == "Current run: Run 2"


def test_undoing_a_delete_keeps_the_runs_estimated_since(window, qtbot):
    # an estimate is not undoable: undoing an earlier edit of the runs must not drop it, and a
    # deleted run's default name is not given again
    panel = window.results.runs
    panel.select("Run 2")
    qtbot.mouseClick(panel.delete_button, Qt.MouseButton.LeftButton)
    estimate(qtbot, window, NESTED)
    assert shown_runs(panel) == ["Run 1", "Run 3"]
    window.undo_action.trigger()
    assert shown_runs(panel) == ["Run 1", "Run 2", "Run 3"]
    panel.select("Run 3")
    panel.rename_selected("again")
    estimate(qtbot, window, NESTED)           # the model as it is: no undoable edit
    window.undo_action.trigger()
    assert shown_runs(panel) == ["Run 1", "Run 2", "Run 3", "Run 4"]


def test_rename_and_note_are_undoable(window):
    panel = window.results.runs
    panel.select("Run 2")
    panel.rename_selected("without calm -> drive")
    panel.annotate_selected("cross-lagged path left out")
    assert shown_runs(panel) == ["Run 1", "without calm -> drive"]
    assert window.session.current_run.note == "cross-lagged path left out"
    assert panel.current_label.text() == "Current run: without calm -> drive"
    window.undo_action.trigger()
    window.undo_action.trigger()
    assert shown_runs(panel) == ["Run 1", "Run 2"] and window.session.current_run.note == ""


def test_reopen_makes_the_run_current_and_its_model_the_model(window, qtbot):
    panel = window.results.runs
    first = window.session.runs[0]
    panel.select("Run 1")
    qtbot.mouseClick(panel.reopen_button, Qt.MouseButton.LeftButton)
    settle(qtbot)
    assert window.session.spec == first.spec == SPEC
    assert window.session.options == first.options
    assert panel.current_label.text() == "Current run: Run 1"
    assert window.results.result is first.result
    assert window.session.result_is_current()
    window.undo_action.trigger()              # one step takes the whole reopen back
    settle(qtbot)
    assert window.session.spec == NESTED
    assert panel.current_label.text() == "Current run: Run 2"


def test_compare_shows_the_likelihood_ratio_test_read_off_the_screen(window, qtbot, tmp_path,
                                                                     artifacts):
    panel = window.results.runs
    panel.select("Run 1", "Run 2")
    qtbot.mouseClick(panel.compare_button, Qt.MouseButton.LeftButton)
    settle(qtbot)
    view = window.results.compare
    assert window.results.tabs.currentWidget() is view
    text = view.tests_label.text()
    found = re.search(r"LR = ([\d.]+) on (\d+) df; scaled for overlapping windows "
                      r"\(Satorra-Bentler difference test, scaling ([\d.]+)\): ([\d.]+), "
                      r"p = (\.\d+|1\.000)", text)
    assert found, text
    full, nested = (run.result.fit for run in window.session.runs)
    lr = 2 * (full.loglik - nested.loglik)
    assert found.group(1) == fmt(lr)
    assert int(found.group(2)) == full.n_free - nested.n_free == 1
    # the window pseudo-likelihood's LR scaled: c_d = (d0 c0 - d1 c1) / (d0 - d1)
    # (Satorra & Bentler 2001) from the two runs' calibrated fit tests
    c_d = ((nested.df * nested.scaled.scaling - full.df * full.scaled.scaling)
           / (nested.df - full.df))
    assert found.group(3) == fmt(c_d) and found.group(4) == fmt(lr / c_d)
    assert found.group(5) == fmt(chi2.sf(lr / c_d, 1), "p")
    window.grab().save(str(artifacts / "compare-two-runs-1280x800.png"))
    # the table exports like the other tables, ending with the caution line
    out = save_table_csv(view.model, tmp_path / "compare.csv", view.caution)
    lines = out.read_text(encoding="utf-8").splitlines()
    assert lines[0] == "Section,Figure or parameter,Run 1,Run 2,Run 2 - Run 1"
    assert any(line.startswith(f"Fit,Log-likelihood,{fmt(full.loglik)},") for line in lines)
    assert lines[-1].startswith("# ")


def test_a_lag2_check_is_kept_with_the_run_it_tested(window, qtbot):
    assert window.run_lag2_check()
    qtbot.waitUntil(lambda: not window.worker.busy and window.results.lag2.check is not None,
                    timeout=TIMEOUT_MS)
    settle(qtbot)
    run = window.session.current_run
    assert run.name == "Run 2" and run.lag2 is window.results.lag2.check
    assert window.session.runs[0].lag2 is None
    saved = window.session.to_project()
    assert [r.name for r in saved.runs] == ["Run 1", "Run 2"] and saved.current_run == "Run 2"
    assert saved.runs[1].lag2 is run.lag2
    # Run 1 (another model, no check of its own) does not show Run 2's check; reopened,
    # Run 2 shows its own check again (its model is made the model before it is shown)
    panel = window.results.runs
    for name, shown in (("Run 1", None), ("Run 2", run.lag2)):
        panel.select(name)
        qtbot.mouseClick(panel.reopen_button, Qt.MouseButton.LeftButton)
        settle(qtbot)
        assert window.results.lag2.check is shown, name
    window.undo_action.trigger()              # back to Run 1, whose model is not the one tested
    settle(qtbot)
    assert window.session.current_run.name == "Run 1" and window.results.lag2.check is None
    assert "model has changed" in window.results.lag2.verdict.text()
