"""Garbage cycles are collected in the window's thread, never in an estimate's worker thread
(a collection there could destroy Qt objects the window's thread owns)."""

from __future__ import annotations

import gc
import threading
import weakref

from PySide6.QtCore import QObject

from lagwise.desktop.app import GC_INTERVAL
from lagwise.desktop.worker import Worker


class _Cycle:
    """A Qt object in a reference cycle: only the cycle collector frees it."""

    def __init__(self) -> None:
        self.me = self
        self.qt = QObject()


def test_cycles_are_collected_on_the_windows_thread_only(lagwise_app, qtbot):
    assert not gc.isenabled()          # no automatic collection, in any thread
    freed_in = []
    cycle = _Cycle()
    weakref.finalize(cycle, lambda: freed_in.append(threading.current_thread()))
    del cycle
    # a worker keeping many new containers alive: automatic collection would start in its thread
    worker = Worker()
    worker.start(_allocate)
    qtbot.waitUntil(lambda: not worker.busy, timeout=30_000)
    assert freed_in in ([], [threading.main_thread()])
    # the window's thread collects within a few ticks once its own counts pass the threshold
    ballast = [{} for _ in range(5 * gc.get_threshold()[0])]
    qtbot.waitUntil(lambda: bool(freed_in), timeout=int(20 * GC_INTERVAL * 1000))
    assert freed_in == [threading.main_thread()] and ballast


def _allocate(monitor=None) -> int:
    kept = [{} for _ in range(200_000)]
    return len(kept)
