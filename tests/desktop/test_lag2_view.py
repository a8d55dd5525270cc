"""The lag-2 check tab shows the engine's Lag2Check numbers exactly as the results number
format writes them, exports them as shown, and asks to adopt only an indicated path.

The check is a real models.lag2check.lag2_check run on a simulated diary with a known lag-2
path (Tension at t-2 -> Mood at t = 0.5), so the tab is exercised on real output.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest
from PySide6.QtCore import Qt

from lagwise.desktop.export import save_table_csv, save_widget_png
from lagwise.desktop.results.palette import NEGATIVE, POSITIVE
from lagwise.desktop.results.lag2_view import Lag2View
from lagwise.models.lag2check import adopt as adopted_spec, in_model
from lagwise.models.numbers import fmt
from lagwise.models.lag2check import lag2_check
from lagwise.models.simulate import simulate_diary
from lagwise.models.spec import make_spec

ARTIFACTS = Path(__file__).resolve().parents[2] / "test-artifacts"
SPEC1 = make_spec({"Tension": ["tense", "restless", "worried"],
                   "Mood": ["cheerful", "content", "relaxed"]}, lags=1)


def _diary(lag2: float, seed: int):
    b2 = np.zeros((2, 2))
    b2[1, 0] = lag2
    return simulate_diary(SPEC1.with_lags(2),
                          loadings=np.array([[1, 0], [.8, 0], [.9, 0], [0, 1], [0, .7], [0, .85]]),
                          intercepts=np.zeros(6), unique=np.full(6, 0.4),
                          lagged=[np.array([[0.4, 0.1], [0.0, 0.3]]), b2],
                          innovation=np.array([[1.0, 0.3], [0.3, 1.0]]), days=30, prompts_per_day=10,
                          seed=seed)


@pytest.fixture(scope="module")
def check():
    result = lag2_check(_diary(0.5, seed=21), SPEC1)
    assert result.indicated, "the simulated lag-2 path must be indicated for these tests"
    return result


@pytest.fixture
def view(qtbot, check):
    w = Lag2View()
    qtbot.addWidget(w)
    w.resize(1000, 720)
    w.set_spec(SPEC1)
    w.show_check(check)
    return w


def _shown(view: Lag2View) -> dict[tuple[str, str, str], dict[str, str]]:
    """Display text of every row (as sorted on screen), keyed by the engine's (kind, from, to)."""
    out = {}
    proxy = view.proxy
    headers = [proxy.headerData(c, Qt.Orientation.Horizontal) for c in range(proxy.columnCount())]
    for r in range(proxy.rowCount()):
        t = view.model.row_record(view.proxy.mapToSource(proxy.index(r, 0)).row())
        out[(t.kind, t.from_, t.to)] = {h: proxy.index(r, c).data() for c, h in enumerate(headers)}
    return out


def _select(view: Lag2View, key) -> None:
    for r in range(view.proxy.rowCount()):
        t = view.model.row_record(view.proxy.mapToSource(view.proxy.index(r, 0)).row())
        if (t.kind, t.from_, t.to) == key:
            view.table.selectRow(r)
            return
    raise AssertionError(key)


def test_numbers_shown_equal_the_check_as_formatted(view, check):
    shown = _shown(view)
    assert len(shown) == len(check.paths)
    for t in check.paths:
        row = shown[(t.kind, t.from_, t.to)]
        assert row["Score"] == fmt(t.score)
        assert row["p"] == fmt(t.p, "p")
        assert row["Holm p"] == fmt(t.p_holm, "p")
        assert row["Expected change"] == fmt(t.epc)
        assert row["Std. expected change"] == fmt(t.std_epc)
        assert row["Test"] == ("Lag-2 path" if t.kind == "lag2" else "Unique autocorrelation")
        assert row["From"].startswith(t.from_) and row["To"].startswith(t.to)
    lr = view.lr_line.text()
    assert f"chi-square {fmt(check.lr_chi2)} on {check.lr_df} df" in lr
    assert f"p {fmt(check.lr_p, 'p')}" in lr
    assert check.verdict in view.verdict.text()
    assert "Holm" in view.multiplicity.text() and str(len(check.paths)) in view.multiplicity.text()
    assert "pseudo-likelihood" in view.cautions.text()


def test_table_sorted_by_score_and_sortable_numerically(view, check):
    proxy = view.proxy
    col = view.model.column_of("Score")
    scores = [view.model.row_record(proxy.mapToSource(proxy.index(r, 0)).row()).score
              for r in range(proxy.rowCount())]
    assert scores == sorted((t.score for t in check.paths), reverse=True)
    view.table.sortByColumn(col, Qt.SortOrder.AscendingOrder)
    scores = [view.model.row_record(proxy.mapToSource(proxy.index(r, 0)).row()).score
              for r in range(proxy.rowCount())]
    assert scores == sorted(t.score for t in check.paths)


def test_adopt_emits_the_selected_indicated_path(view, check, qtbot):
    top = check.indicated[0]
    _select(view, (top.kind, top.from_, top.to))
    assert view.adopt_button.isEnabled()
    with qtbot.waitSignal(view.adopt_requested, timeout=1000) as blocker:
        qtbot.mouseClick(view.adopt_button, Qt.MouseButton.LeftButton)
    assert blocker.args == [top.kind, top.from_, top.to]
    assert (top.kind, top.from_, top.to) == ("lag2", "Tension", "Mood")


def test_adopt_disabled_for_paths_not_indicated(view, check, qtbot):
    quiet = [t for t in check.paths if t not in check.indicated]
    assert quiet
    _select(view, (quiet[0].kind, quiet[0].from_, quiet[0].to))
    assert not view.adopt_button.isEnabled()
    with qtbot.assertNotEmitted(view.adopt_requested):
        qtbot.mouseClick(view.adopt_button, Qt.MouseButton.LeftButton)


def test_adopted_path_is_not_offered_again(view, check):
    top = check.indicated[0]
    new = adopted_spec(SPEC1, top.kind, top.from_, top.to)
    assert new.lags == 2
    mask = new.path_mask(2)
    assert mask[1, 0] and mask.sum() == 1            # only Tension (t-2) -> Mood (t)
    assert np.array_equal(new.path_mask(1), SPEC1.path_mask(1))
    assert in_model(new, top)
    view.set_spec(new)                                # same lag-1 model: the check stays
    assert view.check is check
    _select(view, (top.kind, top.from_, top.to))
    assert not view.adopt_button.isEnabled()
    assert "already in the model" in view.adopt_hint.text()


def test_adopting_a_unique_autocorrelation_and_stale_check(view):
    new = adopted_spec(SPEC1, "unique_autocorrelation", "content", "content")
    assert new.unique_autocorrelation == ("content",) and new.lags == 1
    assert adopted_spec(new, "unique_autocorrelation", "content", "content") is new
    view.set_spec(new)                                # another lag-1 model: the check is cleared
    assert view.check is None
    assert view.proxy.rowCount() == 0
    assert not view.adopt_button.isEnabled()
    assert "changed" in view.verdict.text()


def test_empty_state(qtbot):
    w = Lag2View()
    qtbot.addWidget(w)
    w.show_check(None)
    assert w.proxy.rowCount() == 0
    assert not w.adopt_button.isEnabled()
    assert "No lag-2 check yet" in w.verdict.text()
    with qtbot.waitSignal(w.run_requested, timeout=1000):
        qtbot.mouseClick(w.run_button, Qt.MouseButton.LeftButton)
    w.set_spec(SPEC1.with_lags(0))                    # no lagged paths: nothing to check
    assert not w.run_button.isEnabled()
    w.set_spec(SPEC1)
    assert w.run_button.isEnabled()


def test_csv_export_holds_the_table_as_shown(view, tmp_path):
    path = save_table_csv(view.tables()["lag-2 tests as shown"], tmp_path / "lag2.csv")
    with path.open(newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    proxy = view.proxy
    assert rows[0] == [proxy.headerData(c, Qt.Orientation.Horizontal) for c in range(proxy.columnCount())]
    assert rows[1:] == [[proxy.index(r, c).data() for c in range(proxy.columnCount())]
                        for r in range(proxy.rowCount())]


def test_render_to_png(view, qtbot):
    top = view.check.indicated[0]
    _select(view, (top.kind, top.from_, top.to))
    view.show()
    qtbot.waitExposed(view)
    path = save_widget_png(view, ARTIFACTS / "lag2_view.png", scale=1.0)
    assert path.stat().st_size > 10_000


def test_render_quiet_check_to_png(qtbot):
    # lag-1 data: the quiet verdict and the teal banner
    quiet = lag2_check(_diary(0.0, seed=4), SPEC1)
    w = Lag2View()
    qtbot.addWidget(w)
    w.resize(1000, 720)
    w.set_spec(SPEC1)
    w.show_check(quiet)
    w.show()
    qtbot.waitExposed(w)
    assert quiet.verdict in w.verdict.text()
    alarm = bool(quiet.indicated) or quiet.lr_p < 0.05
    assert (NEGATIVE if alarm else POSITIVE) in w.verdict.styleSheet()
    save_widget_png(w, ARTIFACTS / "lag2_view_quiet.png", scale=1.0)


def test_problems_of_the_fits_are_shown(qtbot, check):
    # a check whose model with lag-2 paths did not converge (the engine's own result, marked)
    from dataclasses import replace
    troubled = replace(check, extended=replace(check.extended, converged=False,
                                               message="The optimiser reached its iteration limit."))
    w = Lag2View()
    qtbot.addWidget(w)
    w.show_check(troubled)
    assert not w.problems.isHidden()
    assert ("model with lag-2 paths did not converge. The optimiser reached its iteration limit."
            in w.problems.text())
    w.show_check(check)
    assert w.problems.isHidden() == (not check.restricted.flags and not check.extended.flags)
