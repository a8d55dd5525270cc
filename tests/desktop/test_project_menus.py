"""Project files through the window's menus, offscreen: Save As, New, Open, Open Recent, the
unsaved-changes mark and question, autosave and the restore offer after a crash, linked
data that moved or changed, preparation steps kept in the project, project notes.

The diary is the bundled demo (resources/demo: simulated, documented there as invented),
imported through the import dialog as a user would. What a reopened project shows is
compared with what the window showed before saving, and the worker must not run: the
stored results are shown without refitting. The reference for the preparation steps is
models.preparation.apply_steps on the same diary. Autosaves go to a temporary folder
(LAGWISE_DATA_DIR), so the user's own recovery folder is never touched.
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import numpy as np
import pytest
from PySide6.QtCore import QPoint, QSettings, Qt
from PySide6.QtGui import QColor, QImage, QPainter
from PySide6.QtWidgets import QDialogButtonBox, QFileDialog, QMessageBox

from window_helpers import import_file, open_window, settle

from lagwise.desktop.app import DEMO_DIARY, DEMO_TRUTH, start_window
from lagwise.desktop.export import table_rows
from lagwise.desktop.mainwindow import PAGES, MainWindow
from lagwise.desktop.project_files import AUTOSAVE_MS, MAX_RECENT, SETTINGS_RECENT
from lagwise.models.diary import TimeSettings
from lagwise.models.errors import DataError
from lagwise.models.preparation import Step, apply_steps
from lagwise.models.project import (
    Project, find_recoveries, link_file, open_project, recovery_path, save_project,
)
from lagwise.models.spec import ModelSpec

TRUTH_SPEC = ModelSpec.from_json(json.loads(DEMO_TRUTH.read_text(encoding="utf-8"))["spec"])
ESTIMATE_TIMEOUT_MS = 120_000
Button = QMessageBox.StandardButton


# ----- helpers -----------------------------------------------------------------------

def same_values(a: np.ndarray, b: np.ndarray) -> bool:
    return a.shape == b.shape and bool(np.array_equal(np.isnan(a), np.isnan(b))) and bool(
        np.allclose(np.nan_to_num(a), np.nan_to_num(b), rtol=0, atol=1e-12))


def title(window: MainWindow) -> str:
    """The title as the system shows it: '[*]' becomes '*' while modified, else vanishes."""
    raw = window.windowTitle()
    return raw.replace("[*]", "*" if window.isWindowModified() else "")


def import_demo(qtbot, window: MainWindow) -> None:
    import_file(qtbot, window, DEMO_DIARY)
    assert window.session.diary is not None


def estimate(qtbot, window: MainWindow) -> None:
    window.estimate_action.trigger()
    qtbot.waitUntil(lambda: not window.worker.busy and window.session.result is not None,
                    timeout=ESTIMATE_TIMEOUT_MS)
    settle(qtbot)


def shown_tables(window: MainWindow) -> dict[str, list[list[str]]]:
    results = window.results
    return {f"{panel.name}/{label}": table_rows(model)
            for panel in results.panels() for label, model in panel.tables().items()}


def answer_save_as(monkeypatch, path: Path) -> list:
    calls = []

    def fake(*args, **kwargs):
        calls.append(args)
        return str(path), ""

    monkeypatch.setattr(QFileDialog, "getSaveFileName", fake)
    return calls


def answer_open(monkeypatch, path: Path | None) -> list:
    calls = []

    def fake(*args, **kwargs):
        calls.append(args)
        return ("" if path is None else str(path)), ""

    monkeypatch.setattr(QFileDialog, "getOpenFileName", fake)
    return calls


def answer_questions(monkeypatch, answer) -> list[str]:
    """QMessageBox.question answers `answer`; the asked texts are returned."""
    asked = []

    def fake(parent, caption, text, *args, **kwargs):
        asked.append(f"{caption}: {text}")
        return answer

    monkeypatch.setattr(QMessageBox, "question", fake)
    return asked


def record_warnings(monkeypatch) -> list[str]:
    shown = []

    def fake(parent, caption, text, *args, **kwargs):
        shown.append(f"{caption}: {text}")
        return Button.Ok

    monkeypatch.setattr(QMessageBox, "warning", fake)
    monkeypatch.setattr(QMessageBox, "information", fake)
    return shown


def image_has_content(path: Path) -> bool:
    small = QImage(str(path)).scaled(40, 40)
    return len({small.pixel(x, y) for x in range(40) for y in range(40)}) > 3


def render_with_title_and_menu(window: MainWindow, menu, path: Path) -> Path:
    """The window as a person sees it: a strip with its title (offscreen windows have no
    frame), the window, and the open menu drawn where it popped up."""
    strip = 30
    image = QImage(window.width(), window.height() + strip, QImage.Format.Format_ARGB32)
    image.fill(QColor("white"))
    painter = QPainter(image)
    painter.fillRect(0, 0, window.width(), strip, QColor("#d9dfe1"))
    painter.drawText(0, 0, window.width(), strip, Qt.AlignmentFlag.AlignCenter, title(window))
    window.render(painter, QPoint(0, strip))
    corner = window.mapFromGlobal(menu.pos())
    menu.render(painter, QPoint(corner.x(), corner.y() + strip))
    painter.end()
    assert image.save(str(path), "PNG")
    return path


def unsaved_box(window: MainWindow) -> QMessageBox:
    box = window.files.question
    assert box is not None and box.isVisible(), "the unsaved-changes question was not asked"
    assert box.objectName() == "unsavedChangesBox"
    return box


def click(qtbot, box: QMessageBox, button) -> None:
    qtbot.mouseClick(box.button(button), Qt.MouseButton.LeftButton)
    settle(qtbot)


# ----- fixtures ----------------------------------------------------------------------
@pytest.fixture
def data_dir(tmp_path, monkeypatch) -> Path:
    """Autosaves go to tmp_path/data/recovery (models.project.recovery_dir)."""
    folder = tmp_path / "data"
    monkeypatch.setenv("LAGWISE_DATA_DIR", str(folder))
    QSettings().setValue(SETTINGS_RECENT, [])
    return folder


@pytest.fixture
def window(qtbot, lagwise_app, data_dir):
    win = open_window(qtbot, 1280, 840)
    yield win
    win.worker.wait()
    win.session.mark_saved(win.session.file)  # nothing to ask when the test closes it
    settle(qtbot)


# ----- the round trip ----------------------------------------------------------------
def test_save_new_open_round_trip_through_the_menus(qtbot, window, tmp_path, monkeypatch,
                                                    artifacts):
    assert title(window) == "untitled — Lagwise"
    assert not window.save_action.isEnabled()
    import_demo(qtbot, window)
    assert title(window) == "untitled* — Lagwise"            # a new import is unsaved
    window.session.edit_spec(TRUTH_SPEC, "Build the model")
    estimate(qtbot, window)
    before_tables = shown_tables(window)
    before = window.session.result
    before_values = window.session.diary.values.copy()
    assert window.session.result_is_current()

    # Save As…
    target = tmp_path / "projects" / "robin"
    target.parent.mkdir()
    asked = answer_save_as(monkeypatch, target)                 # no suffix typed
    window.save_as_action.trigger()
    settle(qtbot)
    saved = target.with_suffix(".lagwise")
    assert asked and saved.is_file()
    assert title(window) == "robin — Lagwise"
    assert window.files.recent()[0] == saved.absolute()

    # New: nothing unsaved, so no question; the document is empty and untitled.
    window.new_action.trigger()
    settle(qtbot)
    assert window.files.question is None
    assert window.session.diary is None and window.session.result is None
    assert window.session.spec.k == 0
    assert title(window) == "untitled — Lagwise"
    assert window.results.stack.currentWidget() is window.results.empty_page

    # Open…: the same data, model and displayed results, without running the worker.
    runs = []
    window.worker.started.connect(lambda: runs.append(window.worker.job))
    answer_open(monkeypatch, saved)
    window.open_action.trigger()
    settle(qtbot, 20)
    session = window.session
    assert runs == [], "opening a project must not refit it"
    assert session.spec == TRUTH_SPEC
    assert same_values(session.diary.values, before_values)
    assert session.diary.items == TRUTH_SPEC.items
    assert [p.estimate for p in session.result.parameters] == [p.estimate for p in
                                                               before.parameters]
    assert shown_tables(window) == before_tables
    assert session.result_is_current()
    assert title(window) == "robin — Lagwise"
    assert window.results.stack.currentWidget() is window.results.tabs

    # An edit marks the title; undo back to the saved state clears the mark.
    window.session.edit_spec(TRUTH_SPEC.with_lags(2), "Lag order 2")
    assert title(window) == "robin* — Lagwise"
    window.undo_action.trigger()
    assert title(window) == "robin — Lagwise"

    # File menu as the user sees it, rendered for a person to look at.
    window.session.edit_spec(TRUTH_SPEC.with_lags(2), "Lag order 2")
    window.show_page(PAGES.index("Results"))
    menu = window.file_menu
    menu.popup(window.mapToGlobal(window.menuBar().geometry().bottomLeft()))
    settle(qtbot, 50)
    texts = [a.text().replace("&", "") for a in menu.actions() if not a.isSeparator()]
    assert texts[:5] == ["New project", "Open project…", "Open recent", "Save project",
                         "Save project as…"]
    picture = render_with_title_and_menu(window, menu, artifacts / "window-file-menu.png")
    assert image_has_content(picture)
    menu.hide()
    assert runs == []


def test_closing_with_unsaved_changes_asks_save_discard_cancel(qtbot, window, tmp_path,
                                                               monkeypatch):
    import_demo(qtbot, window)
    window.session.edit_spec(TRUTH_SPEC, "Build the model")
    assert window.isWindowModified()

    assert not window.close()                                   # asks; nothing closes yet
    click(qtbot, unsaved_box(window), Button.Cancel)
    assert window.isVisible() and window.session.spec == TRUTH_SPEC

    target = tmp_path / "kept.lagwise"                          # Save: asks for a name
    answer_save_as(monkeypatch, target)
    window.close()
    click(qtbot, unsaved_box(window), Button.Save)
    assert not window.isVisible()
    assert open_project(target).spec == TRUTH_SPEC


def test_close_discard_and_new_discard_lose_nothing_saved(qtbot, window, tmp_path, monkeypatch):
    import_demo(qtbot, window)
    target = tmp_path / "first.lagwise"
    answer_save_as(monkeypatch, target)
    window.save_action.trigger()                                 # untitled: Save = Save As
    settle(qtbot)
    on_disk = target.read_bytes()
    window.session.edit_spec(TRUTH_SPEC, "Build the model")
    window.new_action.trigger()                                 # New asks first
    click(qtbot, unsaved_box(window), Button.Discard)
    assert window.session.diary is None
    assert target.read_bytes() == on_disk                       # Discard writes nothing

    answer_open(monkeypatch, target)
    window.open_action.trigger()
    settle(qtbot)
    assert window.session.file == target.absolute() and not window.isWindowModified()
    window.session.edit_spec(TRUTH_SPEC, "Build the model")
    window.close()
    click(qtbot, unsaved_box(window), Button.Discard)
    assert not window.isVisible()
    assert target.read_bytes() == on_disk


# ----- autosave and recovery ---------------------------------------------------------
def test_autosave_and_restore_after_a_crash(qtbot, window, data_dir, tmp_path, monkeypatch):
    assert AUTOSAVE_MS == 3 * 60 * 1000
    assert window.files.autosave_timer.isActive()
    assert window.files.autosave_timer.interval() == AUTOSAVE_MS
    window.files.autosave_timer.timeout.emit()                  # nothing to autosave yet
    assert not (data_dir / "recovery").exists()

    import_demo(qtbot, window)
    window.session.edit_spec(TRUTH_SPEC, "Build the model")
    window.session.set_preparation((Step("detrend"),), "Remove trends")
    window.session.set_notes("Robin's diary, first look.")
    window.files.autosave_timer.timeout.emit()                  # what the timer does
    autosaved = recovery_path(None)
    assert autosaved.parent == data_dir / "recovery" and autosaved.is_file()

    # "Crash": the window goes away without closing, and Lagwise starts again.
    window.files.autosave_timer.stop()
    asked = answer_questions(monkeypatch, Button.Yes)
    restored = start_window()
    qtbot.addWidget(restored)
    settle(qtbot)
    assert len(asked) == 1 and "untitled project" in asked[0]
    session = restored.session
    assert session.spec == TRUTH_SPEC
    assert session.preparation == (Step("detrend"),)
    assert session.notes == "Robin's diary, first look."
    assert same_values(session.diary.values, window.session.diary.values)
    assert restored.isWindowModified(), "restored work is not saved yet"
    assert autosaved.is_file(), "kept until the restored work is saved"

    target = tmp_path / "restored.lagwise"
    answer_save_as(monkeypatch, target)
    restored.save_action.trigger()
    settle(qtbot)
    assert target.is_file() and not autosaved.exists()
    assert not restored.isWindowModified()
    restored.close()
    assert not restored.isVisible()


def test_declined_recovery_is_deleted_and_a_normal_close_leaves_none(qtbot, window, data_dir,
                                                                    monkeypatch):
    import_demo(qtbot, window)
    autosaved = window.files.autosave()
    assert autosaved is not None and autosaved.is_file()
    window.files.autosave_timer.stop()
    asked = answer_questions(monkeypatch, Button.No)
    declined = start_window()
    qtbot.addWidget(declined)
    assert len(asked) == 1
    assert declined.session.diary is None and not autosaved.exists()
    assert find_recoveries() == []

    window.session.edit_spec(TRUTH_SPEC, "Build the model")
    autosaved = window.files.autosave()
    assert autosaved.is_file()
    window.close()
    click(qtbot, unsaved_box(window), Button.Discard)
    assert not window.isVisible() and not autosaved.exists()


# ----- recent projects ---------------------------------------------------------------
def test_recent_projects_newest_first_at_most_eight_missing_ones_pruned(
        qtbot, window, tmp_path, monkeypatch):
    import_demo(qtbot, window)
    paths = [tmp_path / f"p{i}.lagwise" for i in range(MAX_RECENT + 2)]
    for path in paths:
        assert window.files.save_to(path)
    recent = window.files.recent()
    assert recent == [p.absolute() for p in reversed(paths)][:MAX_RECENT]

    paths[-1].unlink()
    paths[-2].unlink()
    menu = window.recent_menu
    menu.aboutToShow.emit()                                     # what opening the menu does
    shown = [a.data() for a in menu.actions()]
    assert shown == [str(p.absolute()) for p in reversed(paths[2:-2])]  # p0, p1: beyond 8
    message = window.statusBar().currentMessage()
    assert "no longer found" in message and paths[-1].name in message

    answer_save_as(monkeypatch, tmp_path / "unused.lagwise")
    window.new_action.trigger()
    settle(qtbot)
    menu.actions()[2].trigger()                                  # "3 p5.lagwise"
    settle(qtbot)
    assert window.session.file == paths[-5].absolute()
    assert window.files.recent()[0] == paths[-5].absolute()

    assert paths[2].absolute() in window.files.recent()
    paths[2].unlink()                                           # gone between show and click
    shown = record_warnings(monkeypatch)
    assert not window.files.open_recent(paths[2].absolute())
    assert shown and "no longer exists" in shown[0]
    assert paths[2].absolute() not in window.files.recent()


# ----- files that cannot be used as they are -----------------------------------------
def test_a_damaged_project_gives_a_dialog_and_loses_nothing(qtbot, window, tmp_path,
                                                            monkeypatch):
    import_demo(qtbot, window)
    window.session.edit_spec(TRUTH_SPEC, "Build the model")
    broken = tmp_path / "broken.lagwise"
    broken.write_text('{"format": "lagwise-project", "format_version": 1, "data": ', "utf-8")
    shown = record_warnings(monkeypatch)
    answer_open(monkeypatch, broken)
    window.open_action.trigger()
    settle(qtbot)
    assert len(shown) == 1 and "incomplete" in shown[0] and "broken.lagwise" in shown[0]
    assert window.files.question is None                        # not even asked to save
    assert window.session.spec == TRUTH_SPEC and window.isWindowModified()

    nowhere = tmp_path / "no such folder" / "robin.lagwise"     # a save that fails
    assert not window.files.save_to(nowhere)
    assert "could not save" in shown[-1] and "nothing was written" in shown[-1]
    assert not nowhere.exists() and window.isWindowModified()
    assert window.session.file is None

    newer = tmp_path / "newer.lagwise"
    newer.write_text('{"format": "lagwise-project", "format_version": 99}', "utf-8")
    window.files.open(newer)
    settle(qtbot)
    assert "newer Lagwise" in shown[-1]
    assert window.session.spec == TRUTH_SPEC


def test_moved_linked_data_is_located_and_relinked(qtbot, window, tmp_path, monkeypatch):
    data = tmp_path / "data" / "diary.csv"
    data.parent.mkdir()
    shutil.copy(DEMO_DIARY, data)
    project = Project(data=link_file(data), items=TRUTH_SPEC.items,
                      time=TimeSettings("grid", "day", "prompt"), spec=TRUTH_SPEC)
    saved = save_project(project, tmp_path / "linked.lagwise")
    moved = tmp_path / "elsewhere" / "diary.csv"
    moved.parent.mkdir()
    shutil.move(data, moved)

    asked = answer_questions(monkeypatch, Button.Yes)
    located = answer_open(monkeypatch, moved)
    assert window.files.open(saved.file)
    settle(qtbot)
    assert "missing" in asked[0] and located
    assert window.session.spec == TRUTH_SPEC
    assert window.session.diary.n_occasions == 252
    assert title(window) == "linked* — Lagwise"                 # the new place is unsaved
    assert window.files.save()
    reopened = open_project(saved.file)
    assert reopened.data.link == moved.absolute()

    # The file changes: asked whether to go on with it as it is now; Cancel keeps all.
    with moved.open("a", encoding="utf-8") as handle:
        handle.write("\n")
    window.session.edit_spec(TRUTH_SPEC.with_lags(2), "Lag order 2")
    asked = answer_questions(monkeypatch, Button.Cancel)
    assert window.files.open(saved.file)
    settle(qtbot)
    assert "changed" in asked[0]
    assert window.session.spec == TRUTH_SPEC.with_lags(2)
    answer_questions(monkeypatch, Button.Yes)
    assert window.files.open(saved.file)
    settle(qtbot)
    click(qtbot, unsaved_box(window), Button.Discard)
    assert window.session.spec == TRUTH_SPEC and window.isWindowModified()


# ----- preparation steps and notes ---------------------------------------------------
def test_preparation_steps_prepare_the_snapshot_undo_and_survive_save_and_open(
        qtbot, window, tmp_path, monkeypatch):
    import_demo(qtbot, window)
    session = window.session
    session.edit_spec(TRUTH_SPEC, "Build the model")
    raw = session.diary
    changes = []
    session.preparationChanged.connect(lambda: changes.append(session.preparation))
    steps = (Step("detrend"), Step("standardize", ("tense", "sad")))
    session.set_preparation(steps, "Remove trends, standardize two items")
    assert changes == [steps]
    snapshot = session.snapshot()
    reference = apply_steps(raw, steps)                         # the data layer's own result
    assert same_values(snapshot.diary.values, reference.values)
    assert not same_values(snapshot.diary.values, raw.values)
    assert snapshot.preparation == steps and snapshot.source is raw
    answered = ~np.isnan(snapshot.diary.values[:, raw.items.index("sad")])
    assert abs(np.std(snapshot.diary.values[answered, raw.items.index("sad")], ddof=1) - 1) < 1e-12

    estimate(qtbot, window)                                     # fitted on the prepared diary
    assert session.result_is_current()
    assert session.result.n_occasions == reference.n_occasions
    window.undo_action.trigger()
    assert session.preparation == () and changes[-1] == ()
    assert session.snapshot().diary is raw
    assert not session.result_is_current()                      # steps are part of the inputs
    assert "changed since this estimate" in window.result_note.text()
    window.redo_action.trigger()
    assert session.result_is_current()

    target = tmp_path / "prepared.lagwise"
    answer_save_as(monkeypatch, target)
    window.save_as_action.trigger()
    settle(qtbot)
    assert json.loads(target.read_text("utf-8"))["preparation"] == [
        {"name": "detrend", "items": None}, {"name": "standardize", "items": ["tense", "sad"]}]
    window.new_action.trigger()
    window.files.open(target)
    settle(qtbot)
    assert session.preparation == steps
    assert same_values(session.snapshot().diary.values, reference.values)
    assert session.result_is_current()
    assert not window.isWindowModified()


def test_a_step_that_does_not_fit_the_diary_changes_nothing(qtbot, window):
    import_demo(qtbot, window)
    with pytest.raises(DataError, match="not an item"):
        window.session.set_preparation((Step("standardize", ("no such item",)),), "Bad")
    assert window.session.preparation == ()
    assert window.session.undo_stack.count() == 0


def test_project_notes_dialog_is_undoable_and_saved(qtbot, window, tmp_path, monkeypatch):
    import_demo(qtbot, window)
    target = tmp_path / "notes.lagwise"
    answer_save_as(monkeypatch, target)
    window.save_action.trigger()
    settle(qtbot)
    assert not window.isWindowModified()
    dialog = window.edit_notes()
    assert dialog.isVisible()
    dialog.editor.setPlainText("Items from the spring wave.\nTrend in 'rested' removed.")
    dialog.buttons.button(QDialogButtonBox.StandardButton.Ok).click()
    settle(qtbot)
    assert window.session.notes.startswith("Items from the spring wave.")
    assert window.isWindowModified()
    window.undo_action.trigger()
    assert window.session.notes == "" and not window.isWindowModified()
    window.redo_action.trigger()
    window.save_action.trigger()
    settle(qtbot)
    assert open_project(target).notes == ("Items from the spring wave.\n"
                                          "Trend in 'rested' removed.")
    dialog = window.edit_notes()
    assert dialog.editor.toPlainText().startswith("Items from the spring wave.")
    dialog.reject()


# ----- starting with a project -------------------------------------------------------
def test_lagwise_project_file_opens_it_in_the_window(qtbot, window, tmp_path, monkeypatch):
    import_demo(qtbot, window)
    window.session.edit_spec(TRUTH_SPEC, "Build the model")
    target = tmp_path / "start.lagwise"
    assert window.files.save_to(target)
    answer_questions(monkeypatch, Button.No)                    # no autosaves to offer anyway
    started = start_window(str(target))
    qtbot.addWidget(started)
    settle(qtbot)
    assert started.session.file == target.absolute()
    assert started.session.spec == TRUTH_SPEC
    assert title(started) == "start — Lagwise"


def test_missing_file_on_the_command_line_is_refused(lagwise_app):
    from lagwise.desktop.app import run_gui
    from lagwise.models.errors import LagwiseError

    with pytest.raises(LagwiseError, match="no such file"):
        run_gui(["/no/such/project.lagwise"])


def test_a_project_saved_in_the_window_refits_at_the_command_line_without_its_data(
        qtbot, window, tmp_path, monkeypatch):
    # Saved in the window, refitted headless: save in the window, delete the data file, refit headless from the
    # project alone: the same estimates as the window's engine result.
    import json
    import shutil

    from lagwise.desktop.cli import main

    data = tmp_path / "diary.csv"
    shutil.copy(DEMO_DIARY, data)
    import_file(qtbot, window, data)
    window.session.edit_spec(TRUTH_SPEC, "Build the model")
    estimate(qtbot, window)
    shown = window.session.result
    target = tmp_path / "robin.lagwise"
    answer_save_as(monkeypatch, target)
    window.save_as_action.trigger()
    settle(qtbot)
    assert target.is_file()
    data.unlink()
    out = tmp_path / "refit.json"
    assert main(["fit", str(target), "--json", str(out)]) == 0
    refit = {(p["kind"], p["from"], p["to"]): p["estimate"] for p in json.loads(out.read_text())["parameters"]}
    assert len(refit) == len(shown.parameters)
    for p in shown.parameters:
        assert refit[(p.kind, p.from_, p.to)] == pytest.approx(p.estimate, rel=1e-6, abs=1e-9)


def test_results_out_of_date_when_saved_stay_out_of_date_when_opened(qtbot, window, tmp_path,
                                                                      monkeypatch):
    from lagwise.models.preparation import Step

    import_demo(qtbot, window)
    window.session.edit_spec(TRUTH_SPEC, "Build the model")
    estimate(qtbot, window)
    window.session.set_preparation((Step("standardize"),), "Preparation steps")
    assert not window.session.result_is_current()
    target = tmp_path / "stale.lagwise"
    answer_save_as(monkeypatch, target)
    window.save_as_action.trigger()
    settle(qtbot)
    answer_open(monkeypatch, target)
    window.new_action.trigger()
    settle(qtbot)
    window.open_action.trigger()
    settle(qtbot)
    assert window.session.result is not None and not window.session.result_is_current()


def test_pasted_control_characters_never_make_the_project_unopenable(qtbot, window, tmp_path,
                                                                     monkeypatch):
    # Notes pasted with a form feed, an ESC colour code and a text-direction override are
    # kept without those characters (a project refuses them on opening; models.names).
    import_demo(qtbot, window)
    target = tmp_path / "pasted.lagwise"
    answer_save_as(monkeypatch, target)
    window.session.set_notes("page\x0cbreak \x1b[31mred\x1b[0m \u202eright\nnext\tline")
    window.save_action.trigger()
    settle(qtbot)
    assert open_project(target).notes == "pagebreak [31mred[0m right\nnext\tline"
