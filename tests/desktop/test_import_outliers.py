"""The import dialog shows each item's answer scale (guessed, editable) and flags answers far
outside the rest of an item, such as -99 beside answers from 0 to 100, with one click to
make them missing.

The diaries are random draws written to a temporary file; the counts checked come from
pandas on the same file.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from PySide6.QtCore import Qt

from lagwise.desktop.import_dialog import ImportDialog


def write_diary(path, codes=(-99.0, -99.0, -99.0, 999.0), seed=2):
    """14 days x 6 prompts: 'calm' on a 0-100 slider with `codes` in some rows, 'tense' on a
    1-7 scale answered between 2 and 6 (random draws, never check values)."""
    rng = np.random.default_rng(seed)
    rows = [(d, p) for d in range(1, 15) for p in range(1, 7)]
    frame = pd.DataFrame(rows, columns=["day", "prompt"])
    frame["calm"] = rng.integers(0, 101, len(rows)).astype(float)
    frame["tense"] = rng.integers(2, 7, len(rows)).astype(float)
    where = rng.choice(len(rows), size=len(codes), replace=False)
    frame.loc[where, "calm"] = codes
    frame.to_csv(path, index=False)
    return frame


@pytest.fixture
def dialog(lagwise_app, qtbot):
    widget = ImportDialog()
    qtbot.addWidget(widget)
    widget.show()
    return widget


def test_far_values_are_flagged_and_made_missing_with_one_click(dialog, qtbot, tmp_path):
    frame = write_diary(tmp_path / "diary.csv")
    dialog.open_path(tmp_path / "diary.csv")
    diary = dialog.diary()
    assert diary is not None and -99 in diary.values  # read as answers so far
    assert dialog.far_label.isVisible() and dialog.far_button.isVisible()
    text = dialog.far_label.text()
    assert "'calm'" in text and "-99 (3 times)" in text and "999 (1 time)" in text
    assert "'tense'" not in text  # 2..6 on a 1-7 scale: nothing far out
    assert dialog.far_button.text() == "Treat -99, 999 as missing"
    qtbot.mouseClick(dialog.far_button, Qt.MouseButton.LeftButton)
    assert dialog.missing_codes() == ("-99", "999")
    diary = dialog.diary()
    codes = frame["calm"].isin([-99, 999])   # counted with pandas
    assert int(np.isnan(diary.values[:, diary.items.index("calm")]).sum()) == int(codes.sum())
    assert not dialog.far_label.isVisible() and not dialog.far_button.isVisible()
    assert dialog.settings().missing_codes == ("-99", "999")


def test_codes_already_given_are_kept_and_not_repeated(dialog, qtbot, tmp_path):
    write_diary(tmp_path / "diary.csv")
    dialog.open_path(tmp_path / "diary.csv")
    dialog.missing_edit.setText("refused")
    dialog.update_preview()
    qtbot.mouseClick(dialog.far_button, Qt.MouseButton.LeftButton)
    assert dialog.missing_codes() == ("refused", "-99", "999")


def test_rare_answers_at_the_scale_ends_are_not_flagged(dialog, tmp_path):
    # answers clustered around 50 with one 0 and one 100: both are ends of the 0-100 slider
    rng = np.random.default_rng(9)
    rows = [(d, p) for d in range(1, 15) for p in range(1, 7)]
    frame = pd.DataFrame(rows, columns=["day", "prompt"])
    frame["calm"] = np.clip(rng.normal(50, 5, len(rows)).round(), 30, 70)
    frame.loc[[0, 1], "calm"] = [0.0, 100.0]
    frame["tense"] = rng.integers(1, 8, len(rows)).astype(float)
    frame.to_csv(tmp_path / "diary.csv", index=False)
    dialog.open_path(tmp_path / "diary.csv")
    assert dialog.diary() is not None
    assert not dialog.far_label.isVisible()


def test_scales_are_guessed_and_can_be_typed_over(dialog, qtbot, tmp_path):
    write_diary(tmp_path / "diary.csv", codes=())
    dialog.open_path(tmp_path / "diary.csv")
    # the smallest usual scale holding the answers (models.scales.COMMON_SCALES)
    assert dialog.scales() == {"calm": (0.0, 100.0), "tense": (1.0, 7.0)}
    table = dialog.scales_table
    assert [table.item(r, 2).text() for r in range(table.rowCount())] == ["0-100", "1-7"]
    table.item(1, 2).setText("0-10")
    assert dialog.scales()["tense"] == (0.0, 10.0)
    assert dict(dialog.settings().scales) == {"calm": (0.0, 100.0), "tense": (0.0, 10.0)}
    dialog.update_preview()                       # a typed scale survives a new preview
    assert table.item(1, 2).text() == "0-10"
    table.item(1, 2).setText("7 to 1")
    assert not dialog.buttons.buttons()[0].isEnabled() or dialog.diary() is None
    assert "LOW-HIGH" in dialog.error_label.text()


def test_the_scales_reach_the_session_and_the_project(qtbot, lagwise_app, tmp_path):
    from PySide6.QtWidgets import QDialogButtonBox

    from lagwise.models.project import open_project, save_project
    from window_helpers import open_window, settle

    write_diary(tmp_path / "diary.csv", codes=())
    window = open_window(qtbot)
    dialog = window.import_dialog(tmp_path / "diary.csv")
    qtbot.addWidget(dialog)
    dialog.show()
    dialog.scales_table.item(1, 2).setText("1-9")
    qtbot.mouseClick(dialog.buttons.button(QDialogButtonBox.StandardButton.Ok),
                     Qt.MouseButton.LeftButton)
    settle(qtbot)
    expected = (("calm", (0.0, 100.0)), ("tense", (1.0, 9.0)))
    assert window.session.import_settings.scales == expected
    saved = save_project(window.session.to_project(), tmp_path / "diary.lagwise")
    assert open_project(saved.file).scales == expected
