"""Pictures and tables saved from the window (desktop/export.py) are replaced in one step or
left byte-identical; a failure is one line in a message box; CSV cells cannot run as
spreadsheet formulas; opening a project removes what killed saves left beside it.

A full disk is simulated (tests/full_disk.py). The formula characters and the leading
apostrophe are the usual defence of CSV export (common practice); Python's csv module and
float() are the independent readers of what was written.
"""

from __future__ import annotations

import csv
import errno
import os
import shutil
import time
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings, strategies as st
from PySide6.QtGui import QImage, QStandardItem, QStandardItemModel
from PySide6.QtWidgets import QFileDialog, QLabel, QMessageBox

from full_disk import fill_disk
from window_helpers import open_window, settle

from lagwise.desktop import export
from lagwise.desktop.export import save_scene_svg, save_table_csv, save_widget_png
from lagwise.models.atomic import STALE_SECONDS
from lagwise.models.diary import TimeSettings
from lagwise.models.errors import OutputError
from lagwise.models.project import Project, embed_file, save_project
from lagwise.models.spec import make_spec

FULL = os.strerror(errno.ENOSPC)  # what the system says of a full disk
OLD = b"an older file, kept byte for byte\n"
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")  # what spreadsheets run (common practice)
DEMO = Path(__file__).resolve().parents[2] / "resources" / "demo" / "demo_diary.csv"


def one_row(*cells: str) -> QStandardItemModel:
    model = QStandardItemModel(1, len(cells))
    model.setHorizontalHeaderLabels([f"c{i}" for i in range(len(cells))])
    for column, text in enumerate(cells):
        model.setItem(0, column, QStandardItem(text))
    return model


def read_back(path: Path) -> list[list[str]]:
    with path.open(newline="", encoding="utf-8") as handle:
        return list(csv.reader(handle))


@pytest.fixture
def label(qtbot, lagwise_app) -> QLabel:
    shown = QLabel("Inertia of tension")
    qtbot.addWidget(shown)
    shown.resize(240, 60)
    shown.show()
    qtbot.waitExposed(shown)
    return shown


def saver(kind: str, label: QLabel):
    return {"csv": lambda path: save_table_csv(one_row("-0.25", "calm"), path),
            "png": lambda path: save_widget_png(label, path),
            "svg": lambda path: save_scene_svg(label, path)}[kind]


@pytest.mark.parametrize("kind", ["csv", "png", "svg"])
def test_a_full_disk_leaves_the_older_file_byte_identical(tmp_path, monkeypatch, label, kind):
    target = tmp_path / f"shown.{kind}"
    target.write_bytes(OLD)
    fill_disk(monkeypatch)
    with pytest.raises(OutputError) as caught:
        saver(kind, label)(target)
    monkeypatch.undo()
    message = str(caught.value)
    assert "\n" not in message and FULL in message and "unchanged" in message
    assert target.read_bytes() == OLD
    assert [p.name for p in tmp_path.iterdir()] == [target.name]


def test_the_png_holds_the_widget_at_the_asked_scale(tmp_path, label):
    path = save_widget_png(label, tmp_path / "label.png", scale=2.0)
    image = QImage(str(path))
    assert (image.width(), image.height()) == (480, 120)


def test_a_failed_export_is_one_line_in_a_message_box(tmp_path, monkeypatch, label):
    target = tmp_path / "shown.csv"
    target.write_bytes(OLD)
    monkeypatch.setattr(QFileDialog, "getSaveFileName", lambda *a, **k: (str(target), ""))
    shown = []
    monkeypatch.setattr(QMessageBox, "warning", lambda *args: shown.append(args[1:3]))
    fill_disk(monkeypatch)
    export.ask_and_save(label, one_row("1"), "shown", "csv")
    monkeypatch.undo()
    assert len(shown) == 1 and shown[0][0] == "Could not save"
    assert "\n" not in shown[0][1] and "unchanged" in shown[0][1]
    assert target.read_bytes() == OLD


# ----- spreadsheet formulas ------------------------------------------------------------

def test_formula_cells_are_inert_and_numbers_stay_numbers(tmp_path):
    cells = ['=HYPERLINK("http://example.org","click")', "@SUM(A1:A9)", "+cmd", "\t=1+1",
             "-0.25 [-0.40, -0.10]", "-0.25", "+3", "-1.5e-08", "0.4", "tense"]
    written = read_back(save_table_csv(one_row(*cells), tmp_path / "t.csv"))
    assert written[1] == ["'" + c for c in cells[:5]] + cells[5:]


SAFE = settings(max_examples=100, deadline=None,
                suppress_health_check=[HealthCheck.function_scoped_fixture])


@SAFE
@given(st.lists(st.text(max_size=12), min_size=1, max_size=4))
def test_no_written_cell_starts_a_formula_unless_it_is_a_number(tmp_path, cells):
    written = read_back(save_table_csv(one_row(*cells), tmp_path / "t.csv"))[1]
    for text, cell in zip(cells, written):
        assert cell in (text, "'" + text)
        if cell[:1] in FORMULA_STARTS:
            float(cell)  # raises unless it is a number


@SAFE
@given(st.one_of(st.integers(), st.floats(allow_nan=False, allow_infinity=False)).map(repr))
def test_plain_numbers_are_written_unchanged(tmp_path, number):
    assert read_back(save_table_csv(one_row(number), tmp_path / "n.csv"))[1] == [number]


# ----- leftovers of killed saves -------------------------------------------------------

def test_opening_a_project_removes_old_temporaries_beside_it(qtbot, lagwise_app, tmp_path,
                                                             monkeypatch):
    monkeypatch.setenv("LAGWISE_DATA_DIR", str(tmp_path / "data"))
    csv_file = tmp_path / "demo_diary.csv"
    shutil.copy(DEMO, csv_file)
    spec = make_spec({"tension": ["tense", "restless", "worried"]})  # the demo's README
    target = tmp_path / "robin.lagwise"
    save_project(Project(data=embed_file(csv_file), items=spec.items, spec=spec,
                         time=TimeSettings(mode="grid", day="day", prompt="prompt")), target)
    stale = tmp_path / ".robin.lagwise.0123abcd.tmp"
    stale.write_bytes(b"half a save")
    then = time.time() - 10 * STALE_SECONDS
    os.utime(stale, (then, then))
    window = open_window(qtbot)
    assert window.files.open(target)
    settle(qtbot)
    assert not stale.exists()
