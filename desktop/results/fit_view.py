"""Fit tab: warnings first, then the fit figures with reading guides, then the cautions.

Warnings (no convergence, paths not stationary, estimates on a boundary) come from the
FitResult's flags and state; the cautions are the FitResult's own texts.
"""

from __future__ import annotations

import html

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QLabel, QScrollArea, QSplitter, QVBoxLayout, QWidget

from lagwise.desktop.results.palette import NEGATIVE, POSITIVE
from lagwise.desktop.results.tables import fit_model, fit_rows
from lagwise.models.numbers import fmt
from lagwise.desktop.results.widgets import ResultsPanel, note_label, section_label, table_view
from lagwise.models.estimators import ERRORS, MISSING
from lagwise.models.flags import FlagCode
from lagwise.models.results import FitResult


READING_GUIDE = (
    "The cut-offs beside the figures are rules of thumb that many researchers use. They were "
    "worked out for other kinds of data (many people, each measured once), they are not laws, "
    "and no single figure decides whether a model is good. Common practice reads an RMSEA of "
    "about .06 or less, a CFI and TLI of about .95 or more, and an SRMR of about .08 or less as "
    "signs of acceptable fit. Read them together, alongside the lag-2 check and whether the "
    "estimates make sense for this person. AIC and BIC only compare models fitted to the same "
    "diary: the lower value is preferred.")


def warnings_of(result: FitResult) -> list[str]:
    """Plain-language warnings: the engine's flags, plus its convergence and stationarity state."""
    notes = []
    if not result.converged:
        notes.append("The estimation did not converge"
                     + (f": {result.message}" if result.message else ".")
                     + " Treat every number below as provisional.")
    if not result.stationary and not result.flagged(FlagCode.NOT_STATIONARY):
        notes.append(f"The lagged paths are not stationary (spectral radius {fmt(result.spectral_radius)}, "
                     "which should be below 1): the states would drift instead of settling back.")
    notes.extend(result.flags)
    return notes


class FitPanel(ResultsPanel):
    name = "fit"

    def __init__(self, parent=None):
        super().__init__("Fit: how well the model reproduces the diary", parent)
        self.banner = QLabel()
        self.banner.setWordWrap(True)
        self.banner.setTextFormat(Qt.TextFormat.RichText)
        self.banner.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.body.addWidget(self.banner)
        self.summary = note_label()
        self.body.addWidget(self.summary)

        self.figures = fit_model(self)
        self.table = table_view(self.figures, stretch_last=True)
        self.guide = note_label(READING_GUIDE)
        self.cautions = note_label()
        self.cautions.setTextFormat(Qt.TextFormat.RichText)
        self.cautions.setStyleSheet("background:#f7f3ea; border:1px solid #e3d9c3; padding:8px; color:#3d3a33;")
        right = QWidget()
        column = QVBoxLayout(right)
        column.setContentsMargins(4, 0, 4, 0)
        column.addWidget(section_label("Reading the fit figures"))
        column.addWidget(self.guide)
        column.addSpacing(10)
        column.addWidget(section_label("Cautions"))
        column.addWidget(self.cautions)
        column.addStretch(1)
        scroll = QScrollArea()
        scroll.setWidget(right)
        scroll.setWidgetResizable(True)
        scroll.setFrameShape(QScrollArea.Shape.NoFrame)
        split = QSplitter(Qt.Orientation.Horizontal)
        split.addWidget(self.table)
        split.addWidget(scroll)
        split.setSizes([700, 500])
        self.body.addWidget(split, 1)

    def show_result(self, result: FitResult) -> None:
        self.figures.set_rows(fit_rows(result))
        warnings = warnings_of(result)
        if warnings:
            items = "".join(f"<li>{html.escape(w)}</li>" for w in warnings)
            self.banner.setText(f"<b>Check before reading on</b><ul style='margin:2px 0 0 -20px'>{items}</ul>")
            self.banner.setStyleSheet(f"background:#fbeee9; border-left:5px solid {NEGATIVE}; "
                                      "padding:8px 10px; color:#3a1d16;")
        else:
            self.banner.setText("No warnings: the estimation converged and the lagged paths are stationary.")
            self.banner.setStyleSheet(f"background:#e8f3f2; border-left:5px solid {POSITIVE}; "
                                      "padding:6px 10px; color:#12403d;")
        method = result.options.method
        missing = (MISSING[result.options.missing].short if method.uses_windows
                   else "bridged by the filter (every answered item used)")
        self.summary.setText(
            f"Estimator: {method.short}; missing prompts: {missing}; {result.data_used} of "
            f"{fmt(result.n_occasions, 'int')} prompts; standard errors: "
            f"{ERRORS[result.se_method]}; {fmt(result.iterations, 'int')} iterations, "
            f"{result.seconds:.2f} s.")
        self.cautions.setText("<br><br>".join(html.escape(c) for c in result.cautions))

    def tables(self) -> dict:
        return {"fit figures": self.figures}
