"""The across-people view shows a batch folder as the engine summarised it: every number is
models.across's, formatted by models.numbers.fmt, and each person's status and reason."""

from __future__ import annotations

import csv
import io
import json

import pytest

from batch_people import RECIPE, people_tables, stacked
from PySide6.QtWidgets import QFileDialog, QPushButton

from lagwise.desktop.across_dialog import AcrossDialog
from lagwise.models.across import CAUTION_LINE, NOT_MULTILEVEL, STUDY_CAUTIONS
from lagwise.models.batch import run_batch
from lagwise.models.errors import DataError
from lagwise.models.numbers import fmt
from lagwise.models.personfit import BatchSettings
from lagwise.models.study import study_from_frame
from two_state_model import SPEC


def _cells(table) -> list[list[str]]:
    return [[table.item(r, c).text() for c in range(table.columnCount())]
            for r in range(table.rowCount())]


def test_the_view_shows_the_batch_summary(lagwise_app, qtbot, tmp_path, monkeypatch):
    tables = people_tables(3)
    tables["short"] = tables["P00"].head(5)
    outcome = run_batch(study_from_frame(stacked(tables), RECIPE, "person"), BatchSettings(SPEC),
                        tmp_path, jobs=1)
    summary = json.loads((tmp_path / "summary.json").read_text())
    dialog = AcrossDialog(tmp_path)
    qtbot.addWidget(dialog)
    assert NOT_MULTILEVEL in dialog.note.text() and dialog.note.text().startswith("3 of 4")
    inertia = {row[0]: row for row in _cells(dialog.inertia)}
    for spread in summary["inertia"]:
        assert inertia[spread["state"]][2:] == [fmt(spread["median"]), fmt(spread["q1"]),
                                                fmt(spread["q3"]), fmt(spread["iqr"])]
    paths = _cells(dialog.paths)
    assert [row[4].split(" (")[0] for row in paths] == [
        f"{p['positive']} of {p['people']}" for p in summary["lagged_paths"]]
    people = _cells(dialog.people)
    assert [row[:2] for row in people] == [[o.person, o.status] for o in outcome.outcomes]
    assert people[-1][3] == outcome.outcomes[-1].reason
    # every fitted person's every free parameter, as estimates.csv holds it (long)
    text = (tmp_path / "estimates.csv").read_text()
    assert text.endswith(CAUTION_LINE)          # the cautions close the file
    long = list(csv.DictReader(io.StringIO(text.removesuffix(CAUTION_LINE))))
    shown = _cells(dialog.estimates)
    assert len(shown) == len(long) and len({row[0] for row in shown}) == 3
    for row, written in zip(shown, long):
        assert row[0] == written["person"] and row[2] == fmt(float(written["estimate"]))
        assert row[4:6] == [fmt(float(written["lower"])), fmt(float(written["upper"]))]
    # one row per person: the same numbers, wide
    text = (tmp_path / "estimates-wide.csv").read_text()
    assert text.endswith(CAUTION_LINE)
    wide = list(csv.DictReader(io.StringIO(text.removesuffix(CAUTION_LINE))))
    assert [w["person"] for w in wide] == ["P00", "P01", "P02"]
    for written in long:
        person = next(w for w in wide if w["person"] == written["person"])
        assert float(person[f"{written['parameter']} estimate"]) == float(written["estimate"])
    assert dialog.wide.rowCount() == 3
    # the strip plot: one dot per fitted person and lagged path
    assert dialog.strips is not None and dialog.strips.renderer().isValid()
    assert dialog.tabs.tabText(dialog.tabs.count() - 1) == "Strip plot"
    # every export ends with the cautions of separate person-specific models
    saved = tmp_path / "exported.csv"
    monkeypatch.setattr(QFileDialog, "getSaveFileName", lambda *a, **k: (str(saved), ""))
    menu = dialog.estimates.parent().findChild(QPushButton).menu()
    for action in menu.actions():
        action.trigger()
        lines = saved.read_text(encoding="utf-8").splitlines()
        assert lines[-1] == "# " + dialog.caution and NOT_MULTILEVEL in dialog.caution
        assert STUDY_CAUTIONS[0] in dialog.caution


def test_a_folder_without_a_batch_is_one_line(lagwise_app, tmp_path):
    with pytest.raises(DataError, match="not a finished batch folder"):
        AcrossDialog(tmp_path)
