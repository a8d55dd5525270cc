"""Many people in the window: a stacked file imported with its person column, the person
picker, "Estimate every person" and the across-people view, and the project keeping the study.

The people are simulated from the two-state model of tests/two_state_model.py (known truth,
tests/batch_people.py), each with a different number of days, so every person's prompt count
is their own. Check values come from the engine itself run directly (models.study,
models.estimate.fit), never from the window.
"""

from __future__ import annotations

import re

import pandas as pd
from PySide6.QtCore import Qt

from batch_people import RECIPE, person_table, stacked
from lagwise.desktop.import_dialog import ImportDialog, guess_role
from lagwise.models.estimate import fit
from lagwise.models.estimators import FitOptions
from lagwise.models.numbers import fmt
from lagwise.models.project import open_project
from lagwise.models.study import study_from_frame
from two_state_model import SPEC
from window_helpers import import_file, open_window, settle

DAYS = {"P00": 5, "P01": 7, "P02": 9}   # each person's own number of days


def _study_file(tmp_path):
    tables = {name: person_table(100 + i, days=days) for i, (name, days) in enumerate(DAYS.items())}
    table = stacked(tables)
    path = tmp_path / "people.csv"
    table.to_csv(path, index=False)
    return path, study_from_frame(table, RECIPE, "person")


def _shown_prompts(window) -> int:
    """The prompt count the Data page's summary line shows."""
    return int(re.search(r"(\d+) prompts? over", window.data_page.summary_label.text()).group(1))


def test_a_person_column_is_guessed_only_for_many_rows_per_value():
    # common practice: an identifier repeated over many rows names the person of each row
    many = pd.Series(["a"] * 30 + ["b"] * 30)
    assert guess_role("participant", many) == "person"
    assert guess_role("id", pd.Series(["a"] * 60)) == "ignore"     # one person: as before
    assert guess_role("id", pd.Series(range(60))) == "ignore"      # a row number


def test_the_window_holds_a_study(lagwise_app, qtbot, tmp_path):
    path, study = _study_file(tmp_path)
    window = open_window(qtbot)
    dialog = window.import_dialog(path)
    qtbot.addWidget(dialog)
    assert dialog.roles()["person"] == "person"
    counts = sorted(p.diary.n_occasions for p in study.people)
    assert f"<b>3</b> people, {counts[0]}-{counts[-1]} prompts each" in dialog.summary_label.text()
    dialog.close()
    import_file(qtbot, window, path)
    bar, session = window.study_bar, window.session
    assert not bar.isHidden() and bar.picker.count() == 3 and "of 3 people" in bar.count.text()
    by_name = {p.person: p for p in study.people}
    assert _shown_prompts(window) == by_name["P00"].diary.n_occasions

    bar.picker.setCurrentIndex(1)
    bar.picker.activated.emit(1)
    settle(qtbot)
    assert session.study.person == "P01"
    assert _shown_prompts(window) == by_name["P01"].diary.n_occasions
    assert (session.diary.values[~pd.isna(session.diary.values)] ==
            by_name["P01"].diary.values[~pd.isna(by_name["P01"].diary.values)]).all()
    session.undo_stack.undo()   # changing person is an undoable edit
    settle(qtbot)
    assert session.study.person == "P00" and bar.picker.currentText() == "P00"
    assert _shown_prompts(window) == by_name["P00"].diary.n_occasions


def test_estimate_every_person_and_open_one(lagwise_app, qtbot, tmp_path, artifacts):
    path, study = _study_file(tmp_path)
    window = open_window(qtbot, 1280, 800)
    import_file(qtbot, window, path)
    session, bar = window.session, window.study_bar
    session.edit_spec(SPEC, "Model")
    batch = bar.estimate_everyone()
    batch.folder_edit.setText(str(tmp_path / "out"))
    batch.jobs_spin.setValue(1)
    with qtbot.waitSignal(batch.finished_batch, timeout=180_000):
        assert batch.start()
    assert batch.statuses() == {p.person: "fitted" for p in study.people}
    assert session.study.batch_folder == str(tmp_path / "out")
    across = bar.across
    assert across.isVisible()
    assert [across.people.item(r, 0).text() for r in range(3)] == ["P00", "P01", "P02"]

    table = across.people
    rect = table.visualItemRect(table.item(2, 0))
    qtbot.mouseClick(table.viewport(), Qt.MouseButton.LeftButton, pos=rect.center())
    settle(qtbot)
    assert session.study.person == "P02" and window.current_page() == 3
    for name, widget in (("window", window), ("batch", batch), ("across", across)):
        widget.grab().save(str(artifacts / f"study-{name}.png"))
    assert window.study_bar.geometry().right() < window.width()   # fits at 1280x800
    assert window.study_bar.choose("P01") and session.result is None   # P02's run is not P01's
    session.undo_stack.undo()
    settle(qtbot)
    assert session.result_is_current()
    direct = fit(study.people[2].diary, SPEC, FitOptions())
    shown = window.results.measurement.loadings
    columns = [shown.headerData(c, Qt.Orientation.Horizontal) for c in range(shown.columnCount())]
    for row in range(shown.rowCount()):
        cell = lambda name: shown.data(shown.index(row, columns.index(name)))  # noqa: E731
        p = direct.get("loading", cell("State"), cell("Item"))
        assert cell("Estimate") == fmt(p.estimate) and cell("SE") == fmt(p.se)

    # the project keeps the study: person column, person shown and batch folder
    project_path = tmp_path / "study.lagwise"
    assert window.files.save_to(project_path)
    assert open_project(project_path).study == session.study
    again = open_window(qtbot)
    again.files.open(project_path)
    settle(qtbot)
    assert again.session.study == session.study
    assert again.study_bar.picker.currentText() == "P02"
    assert _shown_prompts(again) == study.people[2].diary.n_occasions


def test_cancel_keeps_the_finished_people_and_a_rerun_fits_the_rest(lagwise_app, qtbot, tmp_path):
    path, study = _study_file(tmp_path)
    window = open_window(qtbot)
    import_file(qtbot, window, path)
    window.session.edit_spec(SPEC, "Model")
    batch = window.study_bar.estimate_everyone()
    batch.folder_edit.setText(str(tmp_path / "out"))
    batch.jobs_spin.setValue(1)
    with qtbot.waitSignal(batch.worker.idle, timeout=180_000):
        assert batch.start()
        qtbot.mouseClick(batch.cancel_button, Qt.MouseButton.LeftButton)
    assert batch.message.text().startswith("Stopped")
    done = [p for p, status in batch.statuses().items() if status == "fitted"]
    assert len(done) < len(study)
    with qtbot.waitSignal(batch.finished_batch, timeout=180_000):
        assert batch.start()
    assert f"({len(done)} already done)" in batch.message.text()
    assert set(batch.statuses().values()) == {"fitted"}


def test_far_out_answers_of_any_person_are_offered_as_missing(lagwise_app, qtbot, tmp_path):
    tables = {name: person_table(100 + i, days=5) for i, name in enumerate(("P00", "P01"))}
    tables["P01"].loc[3, "c1"] = -99   # a 'no answer' code (common practice) in P01's rows only
    path = tmp_path / "people.csv"
    stacked(tables).to_csv(path, index=False)
    dialog = ImportDialog(None, path)
    qtbot.addWidget(dialog)
    assert dialog.study_choice().person == "P00"      # the preview describes P00's diary
    assert "-99" in dialog.far_codes() and "Item 'c1': -99 (1 time)" in dialog.far_label.text()


def test_every_person_on_a_dask_cluster_typed_in_the_dialog(lagwise_app, qtbot, tmp_path):
    # the scheduler's address typed in the window sends the people to the cluster's workers
    # (a LocalCluster on the loopback address) and is kept for the next time
    from distributed import LocalCluster

    from lagwise.desktop.compute_settings import Compute, load_compute, save_compute

    path, study = _study_file(tmp_path)
    window = open_window(qtbot, 1280, 800)
    import_file(qtbot, window, path)
    window.session.edit_spec(SPEC, "Model")
    batch = window.study_bar.estimate_everyone()
    batch.folder_edit.setText(str(tmp_path / "cluster"))
    batch.scheduler_edit.setText("not an address")
    assert not batch.start() and "not a scheduler address" in batch.message.text()
    try:
        with LocalCluster(host="127.0.0.1", protocol="tcp://", processes=False, n_workers=1,
                          threads_per_worker=1, dashboard_address=None) as cluster:
            batch.scheduler_edit.setText(cluster.scheduler_address)
            with qtbot.waitSignal(batch.finished_batch, timeout=180_000):
                assert batch.start()
            assert load_compute().scheduler == cluster.scheduler_address
    finally:
        save_compute(Compute(1, None))   # later tests compute on this machine
    assert batch.statuses() == {p.person: "fitted" for p in study.people}
    batch.close()
    window.session.mark_saved(None)
