"""Our own words in the window: the Parameters tab grouped by meaning, plain names for the state
scores, one name for the window size, one p-value style, and the optimiser's stop in a sentence."""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QLabel

from lagwise.desktop.export import save_table_csv
from lagwise.desktop.pages.dynamics_page import DynamicsPage
from lagwise.desktop.results import ResultsView
from lagwise.desktop.results.lag2_view import EMPTY_TEXT
from lagwise.desktop.results.state_scores import StateScoresPanel
from lagwise.models.estimate import fit
from lagwise.models.estimators import FitOptions
from lagwise.models.numbers import fmt
from lagwise.models.optimise import stop_sentence
from lagwise.models.report import format_result
from results_fixture import demo_diary, demo_result, demo_spec

DISPLAY = Qt.ItemDataRole.DisplayRole


@pytest.fixture
def view(lagwise_app, qtbot):
    widget = ResultsView()
    qtbot.addWidget(widget)
    widget.show_result(demo_result())
    return widget


def shown(model) -> list[list[str]]:
    """Header and rows of a table model as displayed."""
    columns = range(model.columnCount())
    header = [model.headerData(c, Qt.Orientation.Horizontal, DISPLAY) for c in columns]
    return [header] + [[model.data(model.index(r, c), DISPLAY) for c in columns]
                       for r in range(model.rowCount())]


def row_named(rows, name: str) -> dict[str, str]:
    header = rows[0]
    return dict(zip(header, next(r for r in rows[1:] if r[0] == name)))


# ----- Parameters tab -------------------------------------------------------------------------
def test_parameters_are_grouped_by_meaning_under_header_rows(view):
    panel = view.parameters
    rows = shown(panel.proxy)
    visible = [h for c, h in enumerate(rows[0]) if not panel.table.isColumnHidden(c)]
    assert visible == ["Parameter", "Value", "± SE", "95% range", "p", "In SD units"]
    titles = [r[0] for r in rows[1:] if not any(r[1:])]
    assert titles == ["How items measure states", "Carry-over and cross-lagged effects",
                      "What is new at each prompt", "Item intercepts and unique parts"]
    result = demo_result()
    # every parameter sits under its group: loadings first, the items' own parts last
    start = {t: [r[0] for r in rows[1:]].index(t) for t in titles}
    loading = result.get("loading", "tension", "restless")
    assert start["How items measure states"] < [r[0] for r in rows].index("tension → restless") - 1 \
        < start["Carry-over and cross-lagged effects"]
    assert row_named(rows, "tension → restless")["Value"] == fmt(loading.estimate)


def test_fixed_values_are_marked_and_items_named_once(view):
    rows = shown(view.parameters.proxy)
    result = demo_result()
    marker = result.get("loading", "tension", "tense")
    assert not marker.free
    assert row_named(rows, "tension → tense")["Value"] == f"{fmt(marker.estimate)} (fixed)"
    intercept = result.get("intercept", "tense", "tense")
    assert row_named(rows, "tense: intercept")["Value"] == fmt(intercept.estimate)
    unique = result.get("unique", "tense", "tense")
    assert row_named(rows, "tense: unique variance")["± SE"] == fmt(unique.se)
    assert not any("tense -> tense" in r[0] or "tense → tense" in r[0] for r in rows)
    p = result.get("cross_lagged", "tension", "energy")
    row = row_named(rows, "tension (t-1) → energy")
    assert row["95% range"] == f"[{fmt(p.ci[0])}, {fmt(p.ci[1])}]" and row["p"] == fmt(p.p, "p")


def test_innovation_covariance_in_sd_units_is_told_apart_from_their_correlation(view):
    result = demo_result()
    model = view.parameters.proxy
    rows = shown(model)
    r = [row[0] for row in rows[1:]].index("tension with low mood: covariance")
    column = rows[0].index("In SD units")
    p = result.get("innovation", "tension", "low mood")
    psi = result.innovation
    # correlation of the innovations: covariance / product of their SDs (common practice)
    correlation = psi[0, 1] / np.sqrt(psi[0, 0] * psi[1, 1])
    assert fmt(p.standardized) != fmt(correlation)          # two different numbers
    assert rows[r + 1][column] == fmt(p.standardized)
    tip = model.data(model.index(r, column), Qt.ItemDataRole.ToolTipRole)
    assert "SD units of the states" in tip and fmt(p.standardized) in tip
    assert "correlation of the innovations" in tip and fmt(correlation) in tip
    header_tip = model.headerData(column, Qt.Orientation.Horizontal, Qt.ItemDataRole.ToolTipRole)
    assert "not the correlation of the innovations" in header_tip
    heading = next(label for label in view.innovations.findChildren(QLabel)
                   if label.text() == "Correlations of the innovations")
    assert "In SD units" in heading.toolTip() and "states" in heading.toolTip()


def test_the_grouped_table_exports_as_shown(view, tmp_path):
    model = view.parameters.tables()["parameters as shown"]
    path = save_table_csv(model, tmp_path / "parameters.csv")
    with path.open(encoding="utf-8", newline="") as handle:
        exported = list(csv.reader(handle))
    rows = shown(model)
    assert exported[0] == rows[0] and len(exported) == len(rows)
    assert exported[1][0] == "How items measure states"
    assert row_named(exported, "tense: intercept") == row_named(rows, "tense: intercept")


# ----- state scores and window size -----------------------------------------------------------
def test_state_scores_have_plain_names_with_the_technical_term_in_the_tooltip(lagwise_app, qtbot):
    panel = StateScoresPanel()
    qtbot.addWidget(panel)
    box = panel.filtered_box
    assert "using earlier prompts only" in box.text() and "filtered" not in box.text()
    assert "filtered" in box.toolTip()
    box.setChecked(True)
    legend = panel.legend.text()
    assert "using the whole diary" in legend and "using earlier prompts only" in legend
    assert "smoothed" not in legend and "filtered" not in legend
    assert "smoothed" in panel.legend.toolTip() and "filtered" in panel.legend.toolTip()
    assert "smoothed" not in panel.guide.text() and "filtered" not in panel.guide.text()


def test_the_window_size_has_one_name(session, qtbot):
    page = DynamicsPage(session)
    qtbot.addWidget(page)
    combo = page.depth_combo
    texts = [combo.itemText(i) for i in range(combo.count())]
    assert texts and all(t.startswith("window of ") and t.split()[3] == "prompts" for t in texts)
    assert not any("depth" in t for t in texts)
    assert "windows of 3 prompts" in EMPTY_TEXT


# ----- one p-value style ----------------------------------------------------------------------
def test_a_p_value_reads_the_same_in_the_window_and_the_report(view):
    result = demo_result()
    p = result.get("cross_lagged", "tension", "energy")
    window = row_named(shown(view.parameters.proxy), "tension (t-1) → energy")["p"]
    report = next(line for line in format_result(result).splitlines()
                  if line.split()[:2] == ["tension", "energy"] and fmt(p.estimate) in line)
    assert window in report.split()
    assert window == fmt(p.p, "p") and not window.startswith("0.")


# ----- the optimiser's stop -------------------------------------------------------------------
def test_the_optimisers_stop_is_a_plain_sentence_and_its_words_stay_in_the_json(qtbot, session):
    # one iteration: L-BFGS-B stops at its iteration limit (its own message in capitals)
    result = fit(demo_diary(), demo_spec(), FitOptions(max_iter=1), standard_errors=False)
    assert not result.converged
    assert "ITERATIONS" in result.optimiser_message.upper()
    assert result.message.startswith("The optimiser reached its iteration limit")
    doc = json.loads(json.dumps(result.to_json()))
    assert doc["message"] == result.message and doc["optimiser_message"] == result.optimiser_message
    assert result.optimiser_message not in format_result(result)
    assert result.message in format_result(result)
    from lagwise.desktop.mainwindow import MainWindow

    window = MainWindow(session)
    qtbot.addWidget(window)
    window.session.set_result(result, window.session.snapshot())
    note = window.result_note.text()
    assert "did not converge" in note and "iteration limit" in note
    assert result.optimiser_message not in note


def test_an_old_result_without_the_optimiser_words_still_reads():
    doc = demo_result().to_json()
    del doc["optimiser_message"]
    again = type(demo_result()).from_json(doc)
    assert again.optimiser_message == "" and again.message == demo_result().message


@pytest.mark.parametrize("raw", ["CONVERGENCE: RELATIVE REDUCTION OF F <= FACTR*EPSMCH",
                                 "CONVERGENCE: REL_REDUCTION_OF_F_<=_FACTR*EPSMCH"])
def test_the_optimisers_usual_stop_reads_as_a_sentence(raw):
    # both spellings scipy's L-BFGS-B has used for the same stop
    sentence = stop_sentence(raw)
    assert sentence.startswith("The optimiser stopped because") and sentence.endswith(".")
    assert "FACTR" not in sentence and "EPSMCH" not in sentence
