"""The Plan page: it plans from the current estimates in the window's worker, shows the
engine's table, curve and sentences, keeps a stopped plan's diaries, exports its table, and
fits 1280x800."""

from __future__ import annotations

import csv

from test_layout_1280 import _problems
from window_helpers import open_window, settle

from PySide6.QtWidgets import QFileDialog

from lagwise.desktop.mainwindow import PAGES
from lagwise.desktop.pages.plan_page import CAUTION, NO_MODEL
from lagwise.models import plantruth
from lagwise.models.design import Design
from lagwise.models.plan import run_plan
from lagwise.models.planresults import HEADER, table_rows

TIMEOUT_MS = 120_000


def _demo_estimated(qtbot, width=1280, height=800):
    win = open_window(qtbot, width, height)
    win._open_demo_now()
    win.estimate_action.trigger()
    qtbot.waitUntil(lambda: not win.worker.busy and win.session.result is not None,
                    timeout=TIMEOUT_MS)
    settle(qtbot)
    return win


def _close(qtbot, win):
    win.worker.wait()
    win.session.mark_saved(None)
    settle(qtbot)


def test_a_plan_from_the_estimates_shows_the_engines_numbers(qtbot, lagwise_app, artifacts,
                                                            tmp_path, monkeypatch):
    win = _demo_estimated(qtbot)
    page = win.plan_page
    win.show_page(PAGES.index("Plan"))
    page.days.setText("8, 12")
    page.replications.setValue(3)
    page.seed.setValue(4)
    page.run_button.click()
    qtbot.waitUntil(lambda: page.plan is not None and not win.worker.busy, timeout=TIMEOUT_MS)
    settle(qtbot)
    same = run_plan(plantruth.from_result(win.session.result),
                    [Design(8, 6), Design(12, 6)], replications=3, seed=4, jobs=1)
    assert page.plan.to_json() == same.to_json()
    shown = [tuple(page.model.item(r, c).text() for c in range(len(HEADER)))
             for r in range(page.model.rowCount())]
    assert shown == table_rows(same)
    assert page.sentences.text() == "\n".join(same.sentences())
    assert CAUTION in [label.text() for label in page.findChildren(type(page.sentences))]
    assert any(item.name() for item in page.curve.getPlotItem().listDataItems())
    out = tmp_path / "plan.csv"               # the Export menu's table, as a user saves it
    monkeypatch.setattr(QFileDialog, "getSaveFileName", lambda *a, **k: (str(out), ""))
    next(a for a in page.export_button.menu().actions() if "CSV" in a.text()).trigger()
    with open(out, newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    assert rows[0] == list(HEADER) and len(rows) == 2 + len(shown)
    assert out.read_text(encoding="utf-8").splitlines()[-1] == "# " + CAUTION
    assert page.plan.to_json()["caution"] == CAUTION
    win.grab().save(str(artifacts / "layout-1280x800-Plan-results.png"))
    assert _problems(page) == []
    _close(qtbot, win)


def test_a_stopped_plan_shows_the_diaries_finished_so_far(qtbot, lagwise_app):
    win = _demo_estimated(qtbot, 1400, 900)
    page = win.plan_page
    page.days.setText("10")
    page.replications.setValue(400)
    page.run_button.click()
    qtbot.waitUntil(lambda: page.plan is not None or win.progress.value() > 0,
                    timeout=TIMEOUT_MS)
    win.cancel_estimate()
    qtbot.waitUntil(lambda: page.plan is not None and not win.worker.busy, timeout=TIMEOUT_MS)
    assert not page.plan.complete and page.plan.designs[0].replications < 400
    assert page.sentences.text().startswith("Stopped early")
    _close(qtbot, win)


def test_wrong_days_and_no_model_are_one_plain_line(qtbot, lagwise_app):
    win = open_window(qtbot)
    page = win.plan_page
    page.days.setText("20, 40")
    page.run_button.click()
    assert page.problem.text() == NO_MODEL and not win.worker.busy
    win._open_demo_now()
    settle(qtbot)
    page.days.setText("20, forty")
    page.run_button.click()
    assert "whole numbers separated by commas" in page.problem.text()
    page.days.setText("1")
    page.run_button.click()
    assert "number of days" in page.problem.text() and not win.worker.busy
    _close(qtbot, win)
