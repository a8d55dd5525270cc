"""The small protocol through which long work reports progress and hears cancellation.

Long computations take an optional `monitor` object with two methods:
``report(fraction: float, message: str) -> None`` and ``cancelled() -> bool``.
They call `checkpoint` between steps; it raises `Cancelled` when asked to stop.
The desktop worker supplies a monitor; headless callers pass nothing.
"""

from __future__ import annotations

from typing import Protocol

from lagwise.models.errors import Cancelled


class Monitor(Protocol):
    def report(self, fraction: float, message: str) -> None: ...

    def cancelled(self) -> bool: ...


def checkpoint(monitor: Monitor | None, fraction: float, message: str) -> None:
    """Report progress and raise `Cancelled` if the monitor asks to stop."""
    if monitor is None:
        return
    if monitor.cancelled():
        raise Cancelled("Stopped on request.")
    monitor.report(min(max(fraction, 0.0), 1.0), message)


def scaled(monitor: Monitor | None, lo: float, hi: float) -> Monitor | None:
    """A monitor that maps 0..1 of a sub-task onto lo..hi of the whole."""
    return None if monitor is None else _ScaledMonitor(monitor, lo, hi)


class _ScaledMonitor:
    def __init__(self, monitor: Monitor, lo: float, hi: float):
        self.monitor, self.lo, self.hi = monitor, lo, hi

    def report(self, fraction: float, message: str) -> None:
        self.monitor.report(self.lo + (self.hi - self.lo) * fraction, message)

    def cancelled(self) -> bool:
        return self.monitor.cancelled()
