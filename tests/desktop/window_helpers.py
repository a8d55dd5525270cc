"""Helpers shared by the tests that drive the real window."""

from __future__ import annotations

import gc
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import shiboken6
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QApplication, QDialogButtonBox

from lagwise.desktop.mainwindow import MainWindow


def settle(qtbot, ms: int = 0) -> None:
    """Let queued events (deferred page refreshes, queued worker signals) run, project files
    being opened (read in a worker) arrive in their windows, and results being shown (one tab
    per turn of the event loop) fill every tab."""
    qtbot.wait(ms)
    QApplication.processEvents()
    windows = [w for w in QApplication.topLevelWidgets() if isinstance(w, MainWindow)]

    def pending() -> bool:
        live = [w for w in windows if shiboken6.isValid(w) and shiboken6.isValid(w.session)]
        return any(w.files.reading or w.session.announcing or w.results.filling for w in live)

    if pending():
        qtbot.waitUntil(lambda: not pending(), timeout=30_000)
        QApplication.processEvents()


def shown_results(qtbot, result, width: int = 1280, height: int = 820):
    """A shown ResultsView of `result`, every tab filled (they fill one per turn of the
    event loop), closed by qtbot at the end of the test."""
    from lagwise.desktop.results import ResultsView

    view = ResultsView()
    qtbot.addWidget(view)
    view.resize(width, height)
    view.show()
    view.show_result(result)
    qtbot.waitUntil(lambda: not view.filling)
    return view


def open_window(qtbot, width: int = 1400, height: int = 900) -> MainWindow:
    """A shown main window of the given size, closed by qtbot at the end of the test."""
    win = MainWindow()
    qtbot.addWidget(win)
    win.resize(width, height)
    win.show()
    qtbot.waitExposed(win)
    return win


def import_file(qtbot, window: MainWindow, path: Path) -> None:
    """Import `path` through the import dialog with its guessed roles, as a user clicking OK."""
    dialog = window.import_dialog(path)
    qtbot.addWidget(dialog)
    dialog.show()
    ok = dialog.buttons.button(QDialogButtonBox.StandardButton.Ok)
    assert ok.isEnabled()
    qtbot.mouseClick(ok, Qt.MouseButton.LeftButton)
    settle(qtbot)


@contextmanager
def steady_heap() -> Iterator[None]:
    """For measuring how long the window waits: collect the garbage of earlier tests first and
    freeze what is left, so a full collection of a long test session's heap (hundreds of ms)
    does not land inside the measurement; the window's own work is still measured."""
    gc.collect()
    gc.freeze()
    try:
        yield
    finally:
        gc.unfreeze()
