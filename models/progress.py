"""The small protocol through which long work reports progress and hears cancellation.

Long computations take an optional `monitor` object with two methods:
``report(fraction: float, message: str) -> None`` and ``cancelled() -> bool``.
They call `checkpoint` between steps; it raises `Cancelled` when asked to stop.
The desktop worker supplies a monitor; headless callers pass nothing.
"""

from __future__ import annotations

from typing import Protocol

from models.errors import Cancelled


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
