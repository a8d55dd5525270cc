"""The import dialog's date format: ambiguous day/month dates are refused until it decides."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd

from lagwise.desktop.import_dialog import ImportDialog


def test_date_format_choice_decides_ambiguous_dates(qtbot, tmp_path):
    # Days 1..12 of March written day first: day and month cannot be told from the data.
    stamps = [dt.datetime(2026, 3, d, h) for d in range(1, 13) for h in (9, 15)]
    path = tmp_path / "dayfirst.csv"
    pd.DataFrame({"time": [s.strftime("%d/%m/%Y %H:%M") for s in stamps],
                  "calm": np.arange(24.0) % 7, "tense": np.arange(24.0) % 5}).to_csv(path, index=False)
    dialog = ImportDialog(path=path)
    qtbot.addWidget(dialog)
    assert dialog.roles()["time"] == "timestamp"
    assert dialog.diary() is None and "day or the month first" in dialog.error_label.text()
    dialog.set_date_format("%d/%m/%Y %H:%M")
    diary = dialog.diary()
    assert diary is not None and dialog.error_label.text() == ""
    assert diary.day_labels[:2] == ("2026-03-01", "2026-03-02")  # March, as written
    assert dialog.settings().time.date_format == "%d/%m/%Y %H:%M"  # kept with the project
    dialog.set_date_format(None)
    assert dialog.diary() is None
