"""Drive the real window as a user would, offscreen.

The main scenario imports a CSV through the import dialog, builds the model on the States
and Dynamics pages, estimates in the worker and checks that every number shown in the
results tables is the engine's number (models.estimate.fit on the same diary and model),
that the event loop kept responding, and renders every page to test-artifacts/.
The diary is the bundled demo (resources/demo: simulated, documented there as invented);
the model built by pointing and clicking must equal the model the demo was drawn from
(demo_truth.json "spec").
"""

from __future__ import annotations

import argparse
import gc
import json
import math
import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from PySide6.QtCore import QEvent, QPointF, QSettings, Qt, QTimer
from PySide6.QtGui import QDragEnterEvent, QDragMoveEvent, QDropEvent, QImage
from PySide6.QtWidgets import QApplication, QDialogButtonBox, QMessageBox

from window_helpers import open_window, settle

from lagwise.desktop.app import DEMO_DIARY, DEMO_TRUTH, load_demo, run_demo
from lagwise.desktop.export import save_widget_png, table_rows
from lagwise.desktop.mainwindow import PAGES, MainWindow
from lagwise.desktop.pages.states_page import ITEMS_MIME, NAME_ROLE
from lagwise.desktop.results.parameters import parameter_name
from lagwise.desktop.worker import Worker
from lagwise.models.diary import TimeSettings
from lagwise.models.errors import DataError
from lagwise.models.estimate import fit
from lagwise.models.progress import checkpoint
from lagwise.models.spec import ModelSpec
from lagwise.models.recipe import load_diary

REPO = Path(__file__).resolve().parents[2]
TRUTH_SPEC = ModelSpec.from_json(json.loads(DEMO_TRUTH.read_text(encoding="utf-8"))["spec"])
ESTIMATE_TIMEOUT_MS = 120_000


# ----- helpers -----------------------------------------------------------------------

def quiet_event_loop(qtbot) -> None:
    """Finish pending work (deferred deletions of widgets from earlier tests, garbage) so a
    latency measurement sees only what happens during it."""
    QApplication.sendPostedEvents(None, QEvent.Type.DeferredDelete.value)
    gc.collect()
    settle(qtbot, 50)


def wait_for_result(qtbot, window: MainWindow) -> None:
    qtbot.waitUntil(lambda: not window.worker.busy and window.session.result is not None,
                    timeout=ESTIMATE_TIMEOUT_MS)
    settle(qtbot)


def assert_shows(text: str, value, where: str) -> None:
    """The display text `text` is the engine's `value` rounded to the digits shown."""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        assert text == "—", f"{where}: shows {text!r} for a missing value"
        return
    if text == "<.001":
        assert value < 0.001, f"{where}: shows <.001 for {value}"
        return
    number = float(text)  # also reads ".025" and "-.5"
    decimals = len(text.split(".")[1]) if "." in text else 0
    tolerance = 0.5 * 10.0 ** -decimals + 1e-9
    assert abs(number - value) <= tolerance, f"{where}: shows {text}, engine has {value!r}"


def rows_as_dicts(model) -> list[dict[str, str]]:
    header, *rows = table_rows(model)
    return [dict(zip(header, row)) for row in rows]


def latency_probe(interval_ms: int = 10):
    """A QTimer ticking every `interval_ms`; returns (timer, list of tick times)."""
    ticks: list[float] = []
    timer = QTimer()
    timer.setInterval(interval_ms)
    timer.timeout.connect(lambda: ticks.append(time.perf_counter()))
    return timer, ticks


def drop_on_state(page, state: str, items: list[str]) -> None:
    """Drag `items` from the item list and drop them on `state` in the states tree.

    Qt delivers a drop only inside a running drag (a platform event loop), so the tree's
    drag-enter, drag-move and drop handlers are called with the events such a drag sends.
    """
    source = [page.item_list.item(i) for i in range(page.item_list.count())
              if page.item_list.item(i).data(NAME_ROLE) in items]
    mime = page.item_list.mimeData(source)
    assert mime.hasFormat(ITEMS_MIME)
    node = next(page.tree.topLevelItem(i) for i in range(page.tree.topLevelItemCount())
                if page.tree.topLevelItem(i).data(0, NAME_ROLE) == state)
    point = page.tree.visualItemRect(node).center()
    copy, left, none = (Qt.DropAction.CopyAction, Qt.MouseButton.LeftButton,
                        Qt.KeyboardModifier.NoModifier)
    enter = QDragEnterEvent(point, copy, mime, left, none)
    page.tree.dragEnterEvent(enter)
    assert enter.isAccepted()
    move = QDragMoveEvent(point, copy, mime, left, none)
    page.tree.dragMoveEvent(move)
    assert move.isAccepted()
    drop = QDropEvent(QPointF(point), copy, mime, left, none)
    page.tree.dropEvent(drop)
    assert drop.isAccepted()


def tick_grid(page, state: str, item: str) -> None:
    """Tick the (item, state) check box of the States page grid, as a click would."""
    grid = page.grid
    column = [grid.horizontalHeaderItem(c).text() for c in range(grid.columnCount())].index(state)
    row = [grid.verticalHeaderItem(r).text() for r in range(grid.rowCount())].index(item)
    grid.item(row, column).setCheckState(Qt.CheckState.Checked)


def image_has_content(path: Path) -> bool:
    image = QImage(str(path))
    small = image.scaled(40, 40)
    colours = {small.pixel(x, y) for x in range(40) for y in range(40)}
    return len(colours) > 3


@pytest.fixture
def window(qtbot, lagwise_app):
    win = open_window(qtbot)
    yield win
    win.worker.wait()
    settle(qtbot)


@pytest.fixture
def diary_csv(tmp_path) -> Path:
    """The demo diary as another program might export it: a 'beep' column, a participant
    id, a free-text note, and -99 written where the demo file has an empty cell in 'sad'."""
    frame = pd.read_csv(DEMO_DIARY)
    frame = frame.rename(columns={"prompt": "beep"})
    frame.insert(0, "participant", 7)
    frame["note"] = np.where(np.arange(len(frame)) % 3 == 0, "busy day", "")
    frame["sad"] = frame["sad"].fillna(-99)
    path = tmp_path / "export.csv"
    frame.to_csv(path, index=False)
    return path


# ----- the main scenario -------------------------------------------------------------
def test_from_csv_to_fitted_model_by_pointing_and_clicking(qtbot, window, diary_csv, artifacts):
    # 1. Import through the dialog.
    dialog = window.import_dialog(diary_csv)
    qtbot.addWidget(dialog)
    dialog.show()
    roles = dialog.roles()
    assert roles["day"] == "day" and roles["beep"] == "prompt number"
    assert roles["participant"] == "ignore" and roles["note"] == "ignore"
    assert all(roles[i] == "item" for i in TRUTH_SPEC.items)
    dialog.role_box("rested").setCurrentText("ignore")          # the preview follows the roles
    assert dialog.diary().n_items == 8 and "<b>8</b> items" in dialog.summary_label.text()
    dialog.role_box("rested").setCurrentText("item")
    assert dialog.diary().n_items == 9
    assert np.nanmin(dialog.diary().values) == -99               # not yet a missing code
    qtbot.keyClicks(dialog.missing_edit, "-99")
    dialog.missing_edit.editingFinished.emit()
    ok = dialog.buttons.button(QDialogButtonBox.StandardButton.Ok)
    assert ok.isEnabled()
    assert image_has_content(save_widget_png(dialog, artifacts / "import-dialog.png", 1.0))
    qtbot.mouseClick(ok, Qt.MouseButton.LeftButton)
    settle(qtbot)
    diary = window.session.diary
    # The data layer reading the original demo file gives the same diary (items in file order).
    reference = load_diary(DEMO_DIARY, TRUTH_SPEC.items, TimeSettings("grid", "day", "prompt"))
    assert diary.items == reference.items
    np.testing.assert_array_equal(diary.values, reference.values)
    np.testing.assert_array_equal(diary.segment, reference.segment)

    # 2. States page: three states, items by drag and drop and by the grid.
    window.show_page(PAGES.index("States"))
    page = window.states_page
    for _ in TRUTH_SPEC.states:
        qtbot.mouseClick(page.add_button, Qt.MouseButton.LeftButton)
        settle(qtbot)
    assert window.session.spec.state_names == ("State 1", "State 2", "State 3")
    for i, state in enumerate(TRUTH_SPEC.states):
        page.tree.topLevelItem(i).setText(0, state.name)            # what the name editor commits
        settle(qtbot)
    assert window.session.spec.state_names == TRUTH_SPEC.state_names
    assert "has no items" in page.messages.text()
    first = TRUTH_SPEC.states[0]
    drop_on_state(page, first.name, list(first.items[:2]))
    settle(qtbot)
    assert window.session.spec.states[0].items == first.items[:2]
    tick_grid(page, first.name, first.items[2])
    settle(qtbot)
    for state in TRUTH_SPEC.states[1:]:
        for item in state.items:
            tick_grid(page, state.name, item)
            settle(qtbot)
    assert [s.items for s in window.session.spec.states] == [s.items for s in TRUTH_SPEC.states]
    assert "ready to estimate" in page.messages.text()

    # 3. Dynamics page: inertia only, then free the three cross-lagged paths of the demo.
    window.show_page(PAGES.index("Dynamics"))
    dynamics = window.dynamics_page
    settle(qtbot)
    qtbot.mouseClick(dynamics.grids[1].inertia_button, Qt.MouseButton.LeftButton)
    settle(qtbot)
    np.testing.assert_array_equal(window.session.spec.path_mask(1), np.eye(3, dtype=bool))
    truth_mask = TRUTH_SPEC.path_mask(1)
    table = dynamics.grids[1].table
    for i, j in zip(*np.nonzero(truth_mask & ~np.eye(3, dtype=bool))):
        table.item(int(i), int(j)).setCheckState(Qt.CheckState.Checked)
        settle(qtbot)
    assert window.session.spec == TRUTH_SPEC
    assert table.item(0, 0).text() == "inertia"

    # 4. Estimate in the worker while a 10 ms timer measures the event loop's latency. The
    #    estimate ends when the engine reports its last step (fraction 1) or its result
    #    arrives; drawing the results afterwards is ordinary GUI work and not counted.
    quiet_event_loop(qtbot)
    timer, ticks = latency_probe()
    finished: list[float] = []
    window.worker.progress.connect(
        lambda fraction, _: finished.append(time.perf_counter()) if fraction >= 1.0 else None)
    window.worker.done.connect(lambda _: finished.append(time.perf_counter()))
    timer.start()
    started = time.perf_counter()
    window.estimate_action.trigger()
    assert window.worker.busy and window.cancel_button.isVisible()
    wait_for_result(qtbot, window)
    timer.stop()
    while_estimating = [t for t in ticks if t <= min(finished)]
    gaps = np.diff([started, *while_estimating, min(finished)])  # includes both ends
    assert gaps.max() - 0.010 < 0.100, f"the event loop stalled for {gaps.max() * 1000:.0f} ms"
    assert window.current_page() == PAGES.index("Results")
    assert window.session.result_is_current()
    assert not window.cancel_button.isVisible()

    # 5. The numbers shown are the engine's numbers.
    snap = window.session.snapshot()
    engine = fit(snap.diary, snap.spec, snap.options)
    shown = window.session.result
    np.testing.assert_allclose([p.estimate for p in shown.parameters],
                               [p.estimate for p in engine.parameters], rtol=1e-6, atol=1e-9)
    results = window.results
    loadings = rows_as_dicts(results.measurement.tables()["loadings"])
    assert len(loadings) == len(TRUTH_SPEC.items)
    for row in loadings:
        p = engine.get("loading", row["State"], row["Item"])
        where = f"loading {row['State']} -> {row['Item']}"
        assert_shows(row["Estimate"], p.estimate, where)
        assert_shows(row["Standardized"], p.standardized, where)
        assert_shows(row["SE"], p.se, where)
        assert_shows(row["95% low"], None if p.ci is None else p.ci[0], where)
        assert_shows(row["95% high"], None if p.ci is None else p.ci[1], where)
        assert_shows(row["R²"], float(engine.r_squared[engine.items.index(row["Item"])]), where)
    parameters = {row["Parameter"]: row for row in
                  rows_as_dicts(results.parameters.tables()["parameters as shown"]) if row["Value"]}
    assert len(parameters) == len(engine.parameters)
    for p in engine.parameters:
        where = f"{p.kind} {p.from_} -> {p.to}"
        row = parameters[parameter_name(p)]
        assert_shows(row["Value"].removesuffix(" (fixed)"), p.estimate, where)
        for column, value in (("In SD units", p.standardized), ("± SE", p.se), ("p", p.p)):
            assert_shows(row[column], value, where)
    paths = rows_as_dicts(results.dynamics.tables()["lagged paths"])
    assert len(paths) == int(truth_mask.sum())
    for row in paths:
        kind = "inertia" if row["From"] == row["To"] else "cross_lagged"
        assert_shows(row["Estimate"], engine.get(kind, row["From"], row["To"]).estimate,
                     f"path {row['From']} -> {row['To']}")
    correlations = table_rows(results.innovations.tables()["correlations"])[1:]
    expected = engine.innovation_correlation()
    for i, row in enumerate(correlations):
        for j, text in enumerate(row):
            assert_shows(text, float(expected[i, j]), f"innovation correlation {i},{j}")
    figures = {r["Measure"]: r["Value"] for r in rows_as_dicts(results.fit.tables()["fit figures"])}
    for measure, value in (("Chi-square", engine.fit.chi2), ("RMSEA", engine.fit.rmsea),
                           ("CFI", engine.fit.cfi), ("TLI", engine.fit.tli),
                           ("SRMR", engine.fit.srmr), ("Log-likelihood", engine.fit.loglik)):
        assert_shows(figures[measure], value, measure)

    # 6. Every page (and every results tab) rendered for a person to look at.
    written = []
    for index, name in enumerate(PAGES):
        window.show_page(index)
        settle(qtbot, 20)
        if name == "Results":
            for tab in range(results.tabs.count()):
                results.tabs.setCurrentIndex(tab)
                settle(qtbot, 20)
                label = results.tabs.tabText(tab).lower()
                target = artifacts / f"page-results-{label}.png"
                written.append(save_widget_png(window, target, 1.0))
        else:
            written.append(save_widget_png(window, artifacts / f"page-{name.lower()}.png", 1.0))
    assert all(path.exists() and image_has_content(path) for path in written)


# ----- editing, undo, cancel -----------------------------------------------------------
@pytest.fixture
def demo_window(window, qtbot):
    load_demo(window.session)
    settle(qtbot)
    return window


def test_every_model_edit_can_be_undone_and_redone(qtbot, demo_window):
    session = demo_window.session
    start = session.spec
    dynamics = demo_window.dynamics_page
    demo_window.show_page(PAGES.index("Dynamics"))
    qtbot.mouseClick(dynamics.grids[1].none_button, Qt.MouseButton.LeftButton)
    settle(qtbot)
    assert not session.spec.path_mask(1).any()
    dynamics.lag2.click()
    settle(qtbot)
    assert session.spec.lags == 2 and dynamics.grids[2].isVisible()
    dynamics.innovation_combo.setCurrentIndex(dynamics.innovation_combo.findData("independent"))
    settle(qtbot)
    assert session.spec.innovations == "independent"
    states = demo_window.states_page
    demo_window.show_page(PAGES.index("States"))
    states.tree.setCurrentItem(states.tree.topLevelItem(2))
    states.delete_button.click()
    settle(qtbot)
    assert session.spec.state_names == start.state_names[:2]
    after = session.spec
    for _ in range(4):
        demo_window.undo_action.trigger()
    settle(qtbot)
    assert session.spec == start
    assert dynamics.grids[1].table.item(0, 0).checkState() == Qt.CheckState.Checked
    for _ in range(4):
        demo_window.redo_action.trigger()
    settle(qtbot)
    assert session.spec == after
    assert states.tree.topLevelItemCount() == 2


def test_night_rule_rebuilds_the_diary_and_is_undoable(qtbot, demo_window):
    session = demo_window.session
    days = session.diary.n_days
    assert np.unique(session.diary.segment).size == days          # one segment per day
    demo_window.dynamics_page.night_check.click()
    settle(qtbot)
    assert not session.import_settings.time.days_independent
    assert np.unique(session.diary.segment).size == 1             # nights joined
    demo_window.undo_action.trigger()
    settle(qtbot)
    assert np.unique(session.diary.segment).size == days
    assert demo_window.dynamics_page.night_check.isChecked()


def test_cancelling_a_run_leaves_the_previous_results(qtbot, demo_window):
    demo_window.estimate()
    wait_for_result(qtbot, demo_window)
    before = demo_window.session.result
    parameters = demo_window.results.parameters.tables()["parameters as shown"]
    shown_before = table_rows(parameters)
    demo_window.dynamics_page.quick_choice(1, "all")               # change the model ...
    settle(qtbot)
    demo_window.worker.progress.connect(lambda *_: demo_window.cancel_estimate())
    with qtbot.waitSignal(demo_window.worker.cancelled, timeout=ESTIMATE_TIMEOUT_MS):
        assert demo_window.estimate()                                # ... estimate, cancel
    qtbot.waitUntil(lambda: not demo_window.worker.busy, timeout=ESTIMATE_TIMEOUT_MS)
    settle(qtbot)
    assert demo_window.session.result is before
    assert table_rows(parameters) == shown_before
    assert "previous results are kept" in demo_window.statusBar().currentMessage()
    assert not demo_window.session.result_is_current()
    assert "changed since this estimate" in demo_window.result_note.text()


def test_closing_the_window_waits_for_the_estimate(qtbot, demo_window):
    assert demo_window.estimate()
    assert demo_window.worker.busy
    demo_window.close()                     # cancels and waits; nothing runs afterwards
    assert demo_window.worker.wait(0)
    settle(qtbot)
    assert not demo_window.worker.busy


def test_states_are_renamed_and_markers_chosen_in_plain_words(qtbot, demo_window):
    page = demo_window.states_page
    demo_window.show_page(PAGES.index("States"))
    settle(qtbot)
    page.tree.topLevelItem(0).setText(0, "low mood")               # a name already taken
    settle(qtbot)
    assert demo_window.session.spec.state_names == TRUTH_SPEC.state_names
    assert "already a state named 'low mood'" in page.messages.text()
    page.tree.topLevelItem(0).setText(0, "unease")
    settle(qtbot)
    spec = demo_window.session.spec
    assert spec.state_names[0] == "unease"
    np.testing.assert_array_equal(spec.path_mask(1), TRUTH_SPEC.path_mask(1))  # paths kept
    page.marker_box("unease").setCurrentText("worried")
    settle(qtbot)
    assert demo_window.session.spec.states[0].marker_item == "worried"
    for item in ("tense", "restless"):                               # leave one item
        page.grid.item(TRUTH_SPEC.items.index(item), 0).setCheckState(Qt.CheckState.Unchecked)
        settle(qtbot)
    assert demo_window.session.spec.states[0].items == ("worried",)
    assert "unease has one item: its unique variance is fixed at 0" in page.messages.text()


def _slow_count(steps: int, monitor=None) -> int:
    for i in range(steps):
        checkpoint(monitor, i / steps, f"step {i}")
        time.sleep(0.01)
    return steps


def _bad_file(monitor=None):
    raise DataError("diary.csv, column 'sad', row 5: 'often' is not a number")


def test_a_new_run_cancels_the_previous_one(qtbot, lagwise_app):
    worker = Worker()
    done, cancelled = [], []
    worker.done.connect(done.append)
    worker.cancelled.connect(cancelled.append)
    worker.start(_slow_count, 500)
    worker.start(_slow_count, 3)
    qtbot.waitUntil(lambda: not worker.busy, timeout=10_000)
    settle(qtbot)
    assert done == [3]            # only the newest run reports; the first one was stopped
    assert cancelled == []
    worker.wait()


def test_a_data_error_in_the_worker_becomes_a_readable_dialog(qtbot, window):
    window.worker.start(_bad_file)
    qtbot.waitUntil(lambda: window.findChild(QMessageBox, "estimationErrorBox") is not None,
                    timeout=10_000)
    box = window.findChild(QMessageBox, "estimationErrorBox")
    assert box.text() == "diary.csv, column 'sad', row 5: 'often' is not a number"
    assert box.detailedText() == ""
    box.close()


def test_import_errors_stay_in_the_dialog_and_the_project_is_untouched(qtbot, demo_window,
                                                                       tmp_path):
    before = demo_window.session.diary
    bad = tmp_path / "bad.csv"
    bad.write_text("day,prompt,calm,tense\n1,1,3,4\n1,2,often,5\n1,3,2,2\n", encoding="utf-8")
    dialog = demo_window.import_dialog(bad)
    qtbot.addWidget(dialog)
    assert dialog.role_box("calm").currentText() == "item"        # mostly numbers
    message = dialog.error_label.text()
    assert "'calm'" in message and "row 3" in message and "not a number" in message
    assert not dialog.buttons.button(QDialogButtonBox.StandardButton.Ok).isEnabled()
    dialog.reject()
    missing = demo_window.import_dialog(tmp_path / "nowhere.csv")
    qtbot.addWidget(missing)
    assert "no such file" in missing.error_label.text()
    missing.reject()
    assert demo_window.session.diary is before


def test_window_layout_is_remembered(qtbot, lagwise_app):
    first = MainWindow()
    qtbot.addWidget(first)
    first.show()
    least, room = first.minimumSizeHint(), first.screen().availableGeometry()
    # a size just above the least the window takes, within the screen (a restored window is
    # kept on the screen, so a wider one would come back narrower)
    first.resize(max(least.width(), min(least.width() + 13, room.width() - 4)),
                 max(least.height(), min(least.height() + 7, room.height() - 4)))
    first.show_page(PAGES.index("Dynamics"))
    settle(qtbot)
    size = first.size()
    first.close()
    assert QSettings().value("window/page") in (2, "2")
    second = MainWindow()
    qtbot.addWidget(second)
    assert second.size() == size
    assert second.current_page() == PAGES.index("Dynamics")
    second.show_page(0)
    second.close()


def test_keyboard_reaches_every_command(window):
    shortcuts = {a.text().replace("&", ""): a.shortcut().toString()
                 for a in (window.import_action, window.open_action, window.estimate_action, window.undo_action,
                           window.redo_action, *window.page_actions)}
    assert shortcuts["Estimate"] == "Ctrl+E"
    assert shortcuts["Import data…"] == "Ctrl+I"
    assert shortcuts["Open project…"] == "Ctrl+O"
    assert all(shortcuts[f"{i + 1} {name}"] == f"Ctrl+{i + 1}" for i, name in enumerate(PAGES))
    assert window.undo_action.shortcut().toString() == "Ctrl+Z"
    assert window.redo_action.shortcut().toString() == "Ctrl+Shift+Z"


# ----- the command line ----------------------------------------------------------------
def test_demo_screenshot_is_a_large_png(tmp_path):
    """`lagwise demo --screenshot FILE` in a fresh process without any display settings."""
    target = tmp_path / "demo.png"
    env = {k: v for k, v in os.environ.items()
           if k not in ("QT_QPA_PLATFORM", "DISPLAY", "WAYLAND_DISPLAY")}
    env["XDG_CONFIG_HOME"] = str(tmp_path / "config")  # keep the user's settings untouched
    done = subprocess.run([sys.executable, "-m", "lagwise.desktop.cli", "demo", "--screenshot",
                           str(target)], cwd=REPO, env=env, capture_output=True, text=True,
                          timeout=300)
    assert done.returncode == 0, done.stderr
    image = QImage(str(target))
    assert image.width() >= 1200 and image.height() >= 800
    assert image_has_content(target)


def test_demo_without_a_display_suggests_a_screenshot(monkeypatch, capsys):
    monkeypatch.setattr(sys, "platform", "linux")
    for name in ("DISPLAY", "WAYLAND_DISPLAY", "QT_QPA_PLATFORM"):
        monkeypatch.delenv(name, raising=False)
    assert run_demo(argparse.Namespace(screenshot=None)) == 2
    message = capsys.readouterr().err
    assert message.startswith("lagwise: no display") and "--screenshot" in message
