"""Every page fits the window at 1280x800 (and 1920x1080) with the demo estimated and the
lag-2 check run: no table clipped, no widget cut off, no page that scrolls as a whole.

A table counts as whole when all its rows are visible, or when it has its own scroll bar
and its header is visible; a widget is cut off when it reaches beyond its parent (content
inside a scroll area of its own is reachable by scrolling, so only the page-wide scroll
areas must not scroll); a picture is cut off when its plots need more room than the widget
gives them. Screens of 1280x800 and 1920x1080 are common laptop and desktop sizes (common
practice). Pictures of every page go to test-artifacts/ for a person to look at.
"""

from __future__ import annotations

import pyqtgraph as pg
import pytest
from PySide6.QtCore import QRect
from PySide6.QtWidgets import QAbstractItemView, QAbstractScrollArea, QScrollArea, QWidget

from window_helpers import open_window, settle

from lagwise.desktop.mainwindow import JOB_ESTIMATE, PAGES
from lagwise.desktop.pages.dynamics_page import NO_PATHS_NOTE
from lagwise.desktop.results.view import EMPTY_MESSAGE, ESTIMATING_MESSAGE

TIMEOUT_MS = 120_000


def _estimated_window(qtbot, width: int, height: int, check: bool = True):
    win = open_window(qtbot, width, height)
    win._open_demo_now()
    win.estimate_action.trigger()
    qtbot.waitUntil(lambda: not win.worker.busy and win.session.result is not None, timeout=TIMEOUT_MS)
    if check:
        assert win.run_lag2_check()
        qtbot.waitUntil(lambda: not win.worker.busy and win.results.lag2.check is not None,
                        timeout=TIMEOUT_MS)
    settle(qtbot)
    return win


@pytest.fixture
def close_quietly(qtbot):
    windows = []
    yield windows
    for win in windows:
        win.worker.wait()
        win.session.mark_saved(None)
    settle(qtbot)


def _inside_scroll_content(widget: QWidget, page: QWidget) -> bool:
    """True when `widget` sits in the scrolled content of a scroll area below `page`."""
    parent = widget.parentWidget()
    while parent is not None and parent is not page:
        if isinstance(parent, QAbstractScrollArea) and parent.viewport().isAncestorOf(widget):
            return True
        parent = parent.parentWidget()
    return False


def _page_scroll_areas(page: QWidget) -> list[QScrollArea]:
    """Scroll areas that hold the page's body (children of the page itself): they must never
    need to scroll. Scroll areas deeper down (a stack of plots, a side panel) may."""
    return [s for s in page.findChildren(QScrollArea) if s.isVisible() and s.parentWidget() is page]


def _problems(page: QWidget) -> list[str]:
    found = []
    for scroll in _page_scroll_areas(page):
        content = scroll.widget()
        viewport = scroll.viewport()
        if content.width() > viewport.width() + 1 or content.height() > viewport.height() + 1:
            found.append(f"the page scrolls: content {content.size().toTuple()} in "
                         f"{viewport.size().toTuple()}")
    for widget in page.findChildren(QWidget):
        if not widget.isVisible() or _inside_scroll_content(widget, page):
            continue
        parent = widget.parentWidget()
        inner = QRect(0, 0, parent.width(), parent.height()).adjusted(-1, -1, 1, 1)
        if not inner.contains(widget.geometry()):
            found.append(f"{type(widget).__name__} {widget.objectName()!r} cut off by "
                         f"{type(parent).__name__}: {widget.geometry().getRect()} in {parent.size().toTuple()}")
    for view in page.findChildren(QAbstractItemView):
        if not view.isVisible() or _inside_scroll_content(view, page) or view.model() is None:
            continue
        rows = view.model().rowCount()
        if rows == 0:
            continue
        model, viewport = view.model(), view.viewport()
        last = view.visualRect(model.index(rows - 1, 0))
        all_shown = view.verticalScrollBar().maximum() == 0 and last.bottom() <= viewport.height()
        header = view.horizontalHeader() if hasattr(view, "horizontalHeader") else None
        header_shown = header is None or header.isHidden() or header.height() > 0
        one_row = view.visualRect(model.index(0, 0)).height()
        own_scroll = view.verticalScrollBar().isVisible() and header_shown and viewport.height() >= one_row
        if not (all_shown or own_scroll):
            found.append(f"table {view.objectName() or type(view).__name__} clipped: last row at "
                         f"{last.bottom()} in a viewport of {view.viewport().height()}")
    for plot in page.findChildren(pg.GraphicsView):
        central = plot.centralWidget
        if plot.isVisible() and not _inside_scroll_content(plot, page) and central is not None:
            if central.minimumWidth() > plot.width() + 1 or central.minimumHeight() > plot.height() + 1:
                found.append(f"picture {type(central).__name__} needs {central.minimumWidth():.0f}x"
                             f"{central.minimumHeight():.0f} in {plot.size().toTuple()}")
    return found


def _check_every_page(qtbot, win, artifacts, size: str) -> list[str]:
    problems = []
    for index, name in enumerate(PAGES):
        win.show_page(index)
        settle(qtbot)
        page = win.pages()[index]
        if name != "Results":
            win.grab().save(str(artifacts / f"layout-{size}-{name}.png"))
            problems += [f"{name}: {p}" for p in _problems(page)]
            continue
        tabs = win.results.tabs
        for t in range(tabs.count()):
            tabs.setCurrentIndex(t)
            settle(qtbot)
            label = tabs.tabText(t)
            win.grab().save(str(artifacts / f"layout-{size}-Results-{label.replace(' ', '-')}.png"))
            problems += [f"Results/{label}: {p}" for p in _problems(page)]
    return problems


def test_every_page_fits_1280x800(qtbot, lagwise_app, artifacts, close_quietly):
    win = _estimated_window(qtbot, 1280, 800)
    close_quietly.append(win)
    assert win.results.lag2.check is not None
    assert _check_every_page(qtbot, win, artifacts, "1280x800") == []
    # the table of lagged paths shows every row of the demo's six paths
    panel = win.results.dynamics
    win.show_page(PAGES.index("Results"))
    win.results.tabs.setCurrentWidget(panel)
    settle(qtbot)
    assert panel.paths_view.verticalScrollBar().maximum() == 0
    assert panel.paths_view.viewport().height() >= panel.paths_view.verticalHeader().length()


def test_every_page_fits_1920x1080(qtbot, lagwise_app, artifacts, close_quietly):
    win = _estimated_window(qtbot, 1920, 1080)
    close_quietly.append(win)
    assert _check_every_page(qtbot, win, artifacts, "1920x1080") == []


def test_dynamics_page_estimate_button_runs_the_estimate(qtbot, lagwise_app, close_quietly):
    win = open_window(qtbot, 1280, 800)
    close_quietly.append(win)
    button = win.dynamics_page.estimate_button
    assert not button.isEnabled()            # nothing to estimate yet
    win._open_demo_now()
    settle(qtbot)
    win.show_page(PAGES.index("Dynamics"))
    settle(qtbot)
    assert button.isVisible() and button.isEnabled() and button.text() == "Estimate"
    assert win.results.empty.text() == EMPTY_MESSAGE
    jobs = []
    win.worker.started.connect(lambda: jobs.append(win.worker.job))
    button.click()
    assert jobs == [JOB_ESTIMATE]
    assert win.results.empty.text() == ESTIMATING_MESSAGE   # while the worker runs
    qtbot.waitUntil(lambda: not win.worker.busy and win.session.result is not None, timeout=TIMEOUT_MS)
    settle(qtbot)
    assert win.results.stack.currentWidget() is win.results.tabs
    assert win.results.empty.text() == EMPTY_MESSAGE


def test_lag_order_2_says_that_no_lag2_path_is_ticked(qtbot, lagwise_app, close_quietly):
    win = open_window(qtbot, 1280, 800)
    close_quietly.append(win)
    win._open_demo_now()
    win.show_page(PAGES.index("Dynamics"))
    page = win.dynamics_page
    settle(qtbot)
    assert not page.grids[2].isVisible()
    page.lag2.click()
    settle(qtbot)
    grid = page.grids[2]
    assert grid.isVisible() and win.session.spec.lags == 2
    assert not win.session.spec.path_mask(2).any()
    assert grid.empty_note.isVisible() and grid.empty_note.text() == NO_PATHS_NOTE.format(lag=2)
    assert not page.grids[1].empty_note.isVisible()      # the demo's lag-1 paths are ticked
    grid.all_button.click()
    settle(qtbot)
    assert win.session.spec.path_mask(2).all() and not grid.empty_note.isVisible()
