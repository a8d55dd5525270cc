"""One worker adapter: long work off the UI thread, with progress and cancellation.

`Worker.start(function, *args, job=...)` runs ``function(*args, monitor=monitor)`` on a
thread of its own pool; `job` names the kind of work (for example "estimate" or
"lag2 check") and `Worker.job` tells the receiver of a signal which kind the current run is. The monitor is the small protocol of models/progress.py: ``report(fraction,
message)`` and ``cancelled()``. What happens is delivered to the GUI thread over queued
signals: started, progress, done(result), error(message), cancelled(message), and idle
when nothing runs any more. Starting a new run cancels the previous one; signals of a
superseded run are dropped. The arguments must be immutable values (a frozen snapshot).
"""

from __future__ import annotations

import threading
import time
import traceback

from PySide6.QtCore import QObject, QRunnable, QThreadPool, Qt, Signal, Slot

from lagwise.models.errors import Cancelled, LagwiseError


class _Monitor:
    """Thread-safe monitor handed to the computation (report throttled to ~25 per second)."""

    def __init__(self, run: int, relay: "_Relay") -> None:
        self._run = run
        self._relay = relay
        self._stop = threading.Event()
        self._last = 0.0

    def report(self, fraction: float, message: str) -> None:
        now = time.monotonic()
        if now - self._last >= 0.04 or fraction >= 1.0:
            self._last = now
            self._relay.progress.emit(self._run, float(fraction), str(message))

    def cancelled(self) -> bool:
        return self._stop.is_set()

    def cancel(self) -> None:
        self._stop.set()


class _Relay(QObject):
    """Signals emitted from the worker thread; received in the GUI thread (queued)."""

    progress = Signal(int, float, str)
    done = Signal(int, object)
    error = Signal(int, str, str)
    cancelled = Signal(int, str)
    ended = Signal(int)


class _Job(QRunnable):
    def __init__(self, run: int, function, args, kwargs, monitor: _Monitor, relay: _Relay) -> None:
        super().__init__()
        self.setAutoDelete(False)  # Python owns the job (the Worker keeps it until it ends)
        self._run, self._function, self._args, self._kwargs = run, function, args, kwargs
        self._monitor, self._relay = monitor, relay

    def run(self) -> None:
        relay, run = self._relay, self._run
        try:
            if self._monitor.cancelled():
                raise Cancelled("Stopped on request.")
            result = self._function(*self._args, monitor=self._monitor, **self._kwargs)
        except Cancelled as exc:
            relay.cancelled.emit(run, str(exc))
        except LagwiseError as exc:
            relay.error.emit(run, str(exc), "")
        except Exception as exc:  # a bug: still tell the user, with the details for a report
            relay.error.emit(run, f"Unexpected problem: {exc.__class__.__name__}: {exc}",
                             traceback.format_exc())
        else:
            relay.done.emit(run, result)
        finally:
            relay.ended.emit(run)


class Worker(QObject):
    """Runs one function at a time off the UI thread (see the module docstring)."""

    started = Signal()
    progress = Signal(float, str)
    done = Signal(object)
    error = Signal(str, str)        # readable message, technical details ("" for user errors)
    cancelled = Signal(str)
    idle = Signal()

    def __init__(self, parent: QObject | None = None) -> None:
        super().__init__(parent)
        self._pool = QThreadPool(self)
        self._pool.setMaxThreadCount(1)
        self._relay = _Relay()  # lives in the GUI thread; emitted from the pool's thread
        queued = Qt.ConnectionType.QueuedConnection
        self._relay.progress.connect(self._on_progress, queued)
        self._relay.done.connect(self._on_done, queued)
        self._relay.error.connect(self._on_error, queued)
        self._relay.cancelled.connect(self._on_cancelled, queued)
        self._relay.ended.connect(self._on_ended, queued)
        self._run = 0
        self._monitor: _Monitor | None = None
        self._jobs: dict[int, _Job] = {}
        self._job = ""

    @property
    def busy(self) -> bool:
        return bool(self._jobs)

    @property
    def job(self) -> str:
        """The kind of the current (latest started) run; its signals are the ones delivered."""
        return self._job

    def start(self, function, *args, job: str = "job", **kwargs) -> None:
        """Run ``function(*args, monitor=..., **kwargs)``; a running job is cancelled first.

        `job` names the kind of run (see `job`); it is not passed to the function.
        """
        self.cancel()
        self._job = job
        self._run += 1
        self._monitor = _Monitor(self._run, self._relay)
        job = _Job(self._run, function, args, kwargs, self._monitor, self._relay)
        self._jobs[self._run] = job
        self._pool.start(job)
        self.started.emit()

    def cancel(self) -> None:
        """Ask the current job to stop at its next checkpoint."""
        if self._monitor is not None:
            self._monitor.cancel()

    def wait(self, msecs: int = -1) -> bool:
        """Cancel and block until the pool is empty (used when the window closes)."""
        self.cancel()
        return self._pool.waitForDone(msecs)

    # ----- GUI-thread side -----------------------------------------------------------
    @Slot(int, float, str)
    def _on_progress(self, run: int, fraction: float, message: str) -> None:
        if run == self._run:
            self.progress.emit(fraction, message)

    @Slot(int, object)
    def _on_done(self, run: int, result) -> None:
        if run == self._run:
            self.done.emit(result)

    @Slot(int, str, str)
    def _on_error(self, run: int, message: str, details: str) -> None:
        if run == self._run:
            self.error.emit(message, details)

    @Slot(int, str)
    def _on_cancelled(self, run: int, message: str) -> None:
        if run == self._run:
            self.cancelled.emit(message)

    @Slot(int)
    def _on_ended(self, run: int) -> None:
        self._jobs.pop(run, None)
        if not self._jobs:
            self._monitor = None
            self.idle.emit()
