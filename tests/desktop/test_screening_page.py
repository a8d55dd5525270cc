"""What a researcher sees on the Screening tab before fitting: floor and ceiling counted at
the ends of each item's scale, flat profiles drawn flat, the chosen item kept while steps are
ticked, the KPSS table edge explained, every item in view at 1280x800, and a window that keeps
answering while the diary is screened in the worker.

The diaries are the bundled demo (resources/demo, invented and documented as such) and
random draws; the check values come from models.screening and standard formulas.
"""

from __future__ import annotations

import threading
import time

import numpy as np
import pandas as pd
import pytest
from PySide6.QtCore import QPoint, Qt, QTimer

from lagwise.desktop.pages.data_page import DataPage
from lagwise.desktop.session import ImportSettings
from lagwise.models.diary import TimeSettings
from lagwise.models.preparation import Step
from lagwise.models.screening import item_findings, screen_diary
from window_helpers import open_window, settle, steady_heap

GRID = TimeSettings(mode="grid", day="day", prompt="prompt")
TIMEOUT_MS = 60_000


def column(model, header):
    headers = [model.headerData(c, Qt.Orientation.Horizontal) for c in range(model.columnCount())]
    return headers.index(header)


def screened(qtbot, view):
    """Wait until the view shows a screening of its current inputs."""
    qtbot.waitUntil(lambda: not view.busy and view.screening() is not None, timeout=TIMEOUT_MS)


@pytest.fixture
def page(session, qtbot):
    widget = DataPage(session)
    qtbot.addWidget(widget)
    widget.resize(1400, 950)
    widget.show()
    qtbot.waitExposed(widget)
    widget.tabs.setCurrentWidget(widget.screening_scroll)
    screened(qtbot, widget.screening)
    return widget


def likert_session(session, n_items=15, days=21, seed=4, scales=()):
    """Put a diary of `n_items` 1-7 items into `session` (random draws, never check values):
    answers between 2 and 7, most of them 2 (a floor at the lowest answer given, not at the
    scale's end)."""
    rng = np.random.default_rng(seed)
    rows = [(d, p) for d in range(1, days + 1) for p in range(1, 6)]
    frame = pd.DataFrame(rows, columns=["day", "prompt"])
    for j in range(n_items):
        answers = np.minimum(2 + rng.poisson(0.5, len(rows)), 7).astype(float)
        answers[0] = 7.0   # every item reaches the top of the scale once
        frame[f"item{j + 1:02d}"] = answers
    items = tuple(c for c in frame.columns if c.startswith("item"))
    settings = ImportSettings(path="likert.csv", items=items, time=GRID, scales=scales)
    session.load_data(frame, settings.recipe.diary(frame, "likert.csv"), settings)
    return frame


# ----------------------------------------------------------------------------- scales

def test_floor_is_counted_at_the_scale_end_not_at_the_lowest_answer(session, qtbot):
    frame = likert_session(session, n_items=3)
    page = DataPage(session)
    qtbot.addWidget(page)
    page.show()
    page.tabs.setCurrentWidget(page.screening_scroll)
    screened(qtbot, page.screening)
    view = page.screening
    assert page.scales()["item01"] == (1.0, 7.0)    # answers 2..7: the usual 1-7 scale
    floor = column(view.item_model, "Floor %")
    for r, name in enumerate(("item01", "item02", "item03")):
        # nobody answered 1, the scale's low end: no floor effect (counted with numpy)
        assert np.mean(frame[name] == 1) == 0
        assert view.item_model.index(r, floor).data() == "0"
        assert "floor effect" not in view.screening().item(name).flags
    # the same answers measured against their lowest answer (2) would show a floor
    assert screen_diary(session.diary).item("item01").floor_share == pytest.approx(
        np.mean(frame["item01"] == 2))


def test_a_stated_scale_is_used(session, qtbot):
    frame = likert_session(session, n_items=3, scales=(("item01", (2.0, 7.0)),))
    page = DataPage(session)
    qtbot.addWidget(page)
    page.show()
    page.tabs.setCurrentWidget(page.screening_scroll)
    screened(qtbot, page.screening)
    assert page.scales() == {"item01": (2.0, 7.0), "item02": (1.0, 7.0), "item03": (1.0, 7.0)}
    share = np.mean(frame["item01"] == 2)   # answers at the stated low end, counted with numpy
    floor = column(page.screening.item_model, "Floor %")
    assert page.screening.item_model.index(0, floor).data() == f"{100 * share:.0f}"
    assert "floor effect" in page.screening.screening().item("item01").flags


# ----------------------------------------------------------------------------- profiles

def test_profile_after_removing_prompt_means_is_flat_zero(page, qtbot):
    view = page.screening
    view.checks["prompt_means"].setChecked(True)
    qtbot.waitUntil(lambda: view.screening(prepared=True) is not None and not view.busy,
                    timeout=TIMEOUT_MS)
    for name in page._session.diary.items:
        view.select_item(name)
        qtbot.waitUntil(lambda: not view.busy, timeout=TIMEOUT_MS)
        rows = [[view.plot_model.index(r, c).data() for c in range(6)]
                for r in range(view.plot_model.rowCount())]
        after = [r[4] for r in rows if r[0] == "within day" and r[1] == "after preparation"]
        # the mean of each prompt's deviations from that prompt's mean is 0 (identity)
        assert after and all(value == "0" for value in after), (name, after)


# ----------------------------------------------------------------------------- selection

def test_ticking_a_step_keeps_the_chosen_item(page, qtbot):
    view = page.screening
    table = view.item_table
    row = page._session.diary.items.index("sad")
    table.setCurrentIndex(view.item_model.index(row, 0))
    qtbot.waitUntil(lambda: not view.busy, timeout=TIMEOUT_MS)
    assert view.plot_caption.text().startswith("<b>sad</b>")
    for step in ("detrend", "standardize"):
        view.checks[step].setChecked(True)
        qtbot.waitUntil(lambda: view.screening(prepared=True) is not None and not view.busy,
                        timeout=TIMEOUT_MS)
        settle(qtbot, 20)
        assert table.currentIndex().row() == row
        assert [i.row() for i in table.selectionModel().selectedRows()] == [row]
        assert view.plot_caption.text().startswith("<b>sad</b>")


# ----------------------------------------------------------------------------- KPSS edge

def test_kpss_edge_is_explained_in_a_sentence_and_a_tooltip(page):
    view = page.screening
    edge = [s for s in view.screening().items if s.kpss.p_bounded]
    assert edge  # the demo has items whose KPSS p is at the top of the table
    kpss = column(view.item_model, "KPSS p")
    for s in edge:
        r = page._session.diary.items.index(s.name)
        cell = view.item_model.index(r, kpss)
        assert cell.data().endswith("(edge)")
        tip = cell.data(Qt.ItemDataRole.ToolTipRole)
        # statsmodels tabulates the KPSS p only between 0.01 and 0.10 (as models.unitroot)
        assert "true p is larger than 0.10" in tip
    note = view.edge_label
    assert note.isVisible()
    assert "true p is larger than 0.10" in note.text()
    assert all(s.name in note.text() for s in edge)


# ----------------------------------------------------------------------------- layout

def test_every_item_is_visible_at_1280x800(qtbot, lagwise_app):
    window = open_window(qtbot, 1280, 800)
    likert_session(window.session, n_items=15)
    settle(qtbot)
    page = next(p for p in window.pages() if isinstance(p, DataPage))
    window.show_page(window.pages().index(page))
    page.tabs.setCurrentWidget(page.screening_scroll)
    screened(qtbot, page.screening)
    settle(qtbot, 50)
    view = page.screening
    table, port = view.item_table, view.item_table.viewport()
    assert view.item_model.rowCount() == 15
    bottom = window.centralWidget().mapTo(window, QPoint(0, window.centralWidget().height()))
    for r in range(15):
        rect = table.visualRect(view.item_model.index(r, 0))
        assert 0 <= rect.top() and rect.bottom() <= port.height(), r   # not scrolled away
        assert port.mapTo(window, rect.bottomLeft()).y() <= bottom.y(), r  # inside the window
    notes = column(view.item_model, "Notes")
    x = table.columnViewportPosition(notes)
    assert 0 <= x and x + table.columnWidth(notes) <= port.width()   # no sideways scrolling
    for r, s in enumerate(view.screening().items):
        tip = view.item_model.index(r, notes).data(Qt.ItemDataRole.ToolTipRole) or ""
        for _, sentence in item_findings(s):
            assert sentence in tip


# ----------------------------------------------------------------------------- worker

@steady_heap()
def test_screening_runs_in_the_worker_and_the_window_keeps_answering(page, qtbot,
                                                                  screening_threads):
    page.resize(1280, 800)
    settle(qtbot, 50)
    gaps, last = [], [time.monotonic()]

    def tick():
        now = time.monotonic()
        gaps.append(now - last[0])
        last[0] = now

    timer = QTimer()
    timer.setInterval(10)
    timer.timeout.connect(tick)
    view = page.screening
    timer.start()
    last[0] = time.monotonic()
    view.checks["detrend"].setChecked(True)        # a short diary: 252 prompts
    assert view.busy
    qtbot.waitUntil(lambda: view.screening(prepared=True) is not None and not view.busy,
                    timeout=TIMEOUT_MS)
    settle(qtbot, 30)
    timer.stop()
    assert screening_threads and all(t is not threading.main_thread() for t in screening_threads)
    assert len(gaps) >= 3 and max(gaps) < 0.100, " ".join(f"{g:.3f}" for g in gaps)
