"""Where long runs compute: this computer's cores or a Dask cluster (Model ▸ Computing…).

The setting is the user's, not the project's: it is kept in the application settings
(QSettings) and used by "Estimate every person", the bootstrap and the Plan page. An empty
scheduler address means this computer, with the chosen number of worker processes; an
address (models.parallel.scheduler_address) sends the work to the cluster's workers.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

from PySide6.QtCore import QSettings, Qt
from PySide6.QtWidgets import (
    QDialog, QDialogButtonBox, QFormLayout, QLabel, QLineEdit, QSpinBox, QVBoxLayout, QWidget,
)

from lagwise.models.errors import SpecError
from lagwise.models.parallel import scheduler_address

KEY_JOBS, KEY_SCHEDULER = "compute/jobs", "compute/scheduler"


@dataclass(frozen=True)
class Compute:
    """Worker processes on this computer, or the address of a Dask scheduler (then used)."""

    jobs: int
    scheduler: str | None = None

    def where(self) -> str:
        """Where the work runs, in words."""
        if self.scheduler:
            return f"on the Dask cluster at {self.scheduler}"
        return f"on this computer, {self.jobs} worker process{'es' if self.jobs != 1 else ''}"


def default_jobs() -> int:
    return max(1, (os.cpu_count() or 1) - 1)


def load_compute() -> Compute:
    """The stored setting (a damaged one falls back to this computer)."""
    settings = QSettings()
    try:
        jobs = int(settings.value(KEY_JOBS, default_jobs()))
    except (TypeError, ValueError):
        jobs = default_jobs()
    try:
        scheduler = scheduler_address(str(settings.value(KEY_SCHEDULER, "") or ""))
    except SpecError:
        scheduler = None
    return Compute(min(max(jobs, 1), os.cpu_count() or 1), scheduler)


def save_compute(compute: Compute) -> None:
    settings = QSettings()
    settings.setValue(KEY_JOBS, compute.jobs)
    settings.setValue(KEY_SCHEDULER, compute.scheduler or "")


class ComputeDialog(QDialog):
    """Model ▸ Computing…: worker processes and the scheduler address; OK stores them."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Computing")
        current = load_compute()
        layout = QVBoxLayout(self)
        intro = QLabel("Estimating every person of a study and planning a diary run many "
                       "independent fits: on this computer's cores, or on a Dask cluster "
                       "(start 'dask scheduler' on one machine and 'dask worker ADDRESS "
                       "--nthreads 1' on each worker, then type the scheduler's address).")
        intro.setWordWrap(True)
        layout.addWidget(intro)
        form = QFormLayout()
        self.jobs = QSpinBox(minimum=1, maximum=os.cpu_count() or 1, value=current.jobs)
        self.jobs.setToolTip("Worker processes on this computer (used when no address is given)")
        form.addRow("&Worker processes:", self.jobs)
        self.address = QLineEdit(current.scheduler or "")
        self.address.setObjectName("schedulerAddress")
        self.address.setPlaceholderText("empty: this computer; or e.g. tcp://192.168.1.20:8786")
        form.addRow("Dask &scheduler:", self.address)
        layout.addLayout(form)
        self.problem = QLabel("")
        self.problem.setObjectName("computeProblem")
        self.problem.setTextFormat(Qt.TextFormat.PlainText)
        self.problem.setWordWrap(True)
        self.problem.hide()
        layout.addWidget(self.problem)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok
                                   | QDialogButtonBox.StandardButton.Cancel)
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        layout.addWidget(buttons)
        self.buttons = buttons

    def compute(self) -> Compute:
        """What the dialog holds; SpecError in one line for a wrong address."""
        return Compute(self.jobs.value(), scheduler_address(self.address.text()))

    def accept(self) -> None:
        try:
            compute = self.compute()
        except SpecError as error:
            self.problem.setText(str(error))
            self.problem.show()
            return
        save_compute(compute)
        super().accept()
