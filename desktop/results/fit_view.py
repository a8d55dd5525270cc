"""Fit tab: the fit figures that apply to the estimator, grouped, with reading guides.

The window estimators' figures come in three groups: "Exact-fit test" (chi-square, df, p; the
test adjusted for overlapping windows first), "Approximate fit" (RMSEA with its interval, CFI,
TLI, SRMR) and "For comparing models" (log-likelihood, AIC, BIC), then the size of the
estimate. The exact estimator has no saturated window model to compare with, so it shows only
the log-likelihood, AIC and BIC, its counts, and one line saying why. Warnings and cautions
are above and below every tab (desktop.results.warnings_strip).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from PySide6.QtCore import Qt
from PySide6.QtGui import QFont
from PySide6.QtWidgets import QScrollArea, QSplitter, QVBoxLayout, QWidget

from lagwise.desktop.results.tables import Column, RecordsModel
from lagwise.desktop.results.widgets import ResultsPanel, note_label, section_label, table_view
from lagwise.models.estimators import ERRORS, MISSING
from lagwise.models.numbers import fmt
from lagwise.models.results import FitResult

READING_GUIDE = (
    "The cut-offs beside the figures are rules of thumb that many researchers use. They were "
    "worked out for other kinds of data (many people, each measured once), they are not laws, "
    "and no single figure decides whether a model is good. Common practice reads an RMSEA of "
    "about .06 or less, a CFI and TLI of about .95 or more, and an SRMR of about .08 or less as "
    "signs of acceptable fit. Read them together, alongside the lag-2 check and whether the "
    "estimates make sense for this person. AIC and BIC only compare models fitted to the same "
    "diary: the lower value is preferred.")
EXACT_GUIDE = (
    "AIC and BIC compare models fitted to the same diary with the exact estimator: the lower "
    "value is preferred. Read them alongside the lag-2 check and whether the estimates make "
    "sense for this person.")
NOT_APPLICABLE = (
    "The chi-square test, RMSEA, CFI, TLI and SRMR do not apply to the exact likelihood: they "
    "compare the model with an unrestricted covariance of lag windows, and the exact estimator "
    "follows the whole series instead of cutting it into windows.")
EXACT_FIT_TEST = "Exact-fit test"
APPROXIMATE_FIT = "Approximate fit"
COMPARING = "For comparing models"
THE_ESTIMATE = "The estimate"


@dataclass(frozen=True)
class FitRow:
    """One line of the fit table: measure, engine value, number style ("heading": a group
    title, no value), rule of thumb."""

    measure: str
    value: Any = None
    style: str = "number"
    guide: str = ""


FIT_COLUMNS = (
    Column("Measure", lambda r: r.measure, "text"),
    Column("Value", lambda r: r.value),
    Column("Rule of thumb (common practice, not a law)", lambda r: r.guide, "text"),
)


class FitIndicesModel(RecordsModel):
    """Fit figures; the value column follows each row's own number style; group titles bold."""

    def __init__(self, parent=None):
        super().__init__(FIT_COLUMNS, parent=parent)

    def data(self, index, role=Qt.ItemDataRole.DisplayRole):
        if not index.isValid():
            return None
        row: FitRow = self.row_record(index.row())
        heading = row.style == "heading"
        if role == Qt.ItemDataRole.FontRole and heading and index.column() == 0:
            font = QFont()
            font.setBold(True)
            return font
        if index.column() == 1 and role == Qt.ItemDataRole.DisplayRole:
            return "" if heading else fmt(row.value, row.style)
        return super().data(index, role)


def heading(title: str, guide: str = "") -> FitRow:
    return FitRow(title, style="heading", guide=guide)


def fit_rows(result: FitResult) -> list[FitRow]:
    """The fit figures of a result that apply to its estimator, grouped under headings."""
    f = result.fit
    comparing = [
        heading(COMPARING, "Models of the same diary and estimator"),
        FitRow("Log-likelihood", f.loglik,
               guide="Exact likelihood of the series" if f.exact else "Window pseudo-likelihood"),
        FitRow("AIC", f.aic, guide="Lower is better, only between models of the same diary"),
        FitRow("BIC", f.bic, guide="Lower is better, only between models of the same diary"),
    ]
    counts = [FitRow("Lag windows", result.n_windows, "int")] if not f.exact else [
        FitRow("Answered prompts", result.n_windows, "int",
               "Prompts with at least one answer: each counts")]
    estimate = [
        heading(THE_ESTIMATE),
        FitRow("Free parameters", f.n_free, "int"),
        *counts,
        FitRow("Prompts (occasions)", result.n_occasions, "int"),
        FitRow("Spectral radius of the lagged paths", result.spectral_radius,
               guide="Below 1: the states settle back (stationary)"),
    ]
    if f.exact:
        return comparing + estimate
    low, high = f.rmsea_ci if f.rmsea_ci is not None else (None, None)
    s = f.scaled
    test = [heading(EXACT_FIT_TEST, "Does the model reproduce the windows' covariances?")]
    approximate = [heading(APPROXIMATE_FIT, "How far from exact fit, per degree of freedom")]
    if s is not None:
        test += [
            FitRow("Calibrated chi-square", s.chi2,
                   guide="Adjusted for overlapping windows (mean and variance): read this test"),
            FitRow("Calibrated df", s.df, guide="Need not be a whole number"),
            FitRow("Calibrated p", s.p, "p", "Above .05: no clear evidence of misfit"),
        ]
        approximate += [
            FitRow("Calibrated RMSEA", s.rmsea, guide="From the calibrated chi-square; around .06 or below"),
            FitRow("Calibrated CFI", s.cfi, guide="From the calibrated chi-squares; around .95 or above"),
            FitRow("Calibrated TLI", s.tli, guide="From the calibrated chi-squares; around .95 or above"),
        ]
    test += [
        FitRow("Chi-square", f.chi2,
               guide="Compare with df; with many windows small misfit shows" if s is None
               else "Windows treated as independent: too kind to the model"),
        FitRow("Degrees of freedom (df)", f.df, "int"),
        FitRow("p (chi-square)", f.p, "p", "Above .05: no clear evidence of misfit"),
    ]
    approximate += [
        FitRow("RMSEA", f.rmsea, guide="Around .06 or below is often read as close fit"),
        FitRow("RMSEA 90% interval, low", low),
        FitRow("RMSEA 90% interval, high", high, guide="A wide interval means the data say little"),
        FitRow("p (RMSEA ≤ .05)", f.rmsea_pclose, "p"),
        FitRow("CFI", f.cfi, guide="Around .95 or above is often read as good fit"),
        FitRow("TLI", f.tli, guide="Around .95 or above is often read as good fit"),
        FitRow("SRMR", f.srmr, guide="Around .08 or below is often read as acceptable"),
    ]
    return test + approximate + comparing + estimate


class FitPanel(ResultsPanel):
    name = "fit"

    def __init__(self, parent=None):
        super().__init__("Fit: how well the model reproduces the diary", parent)
        self.summary = note_label()
        self.body.addWidget(self.summary)
        self.not_applicable = note_label(NOT_APPLICABLE)
        self.not_applicable.setObjectName("fitNotApplicable")
        self.body.addWidget(self.not_applicable)

        self.figures = FitIndicesModel(self)
        self.table = table_view(self.figures, stretch_last=True)
        self.guide = note_label(READING_GUIDE)
        right = QWidget()
        column = QVBoxLayout(right)
        column.setContentsMargins(4, 0, 4, 0)
        column.addWidget(section_label("Reading the fit figures"))
        column.addWidget(self.guide)
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
        method = result.options.method
        self.not_applicable.setVisible(not method.uses_windows)
        self.guide.setText(READING_GUIDE if method.uses_windows else EXACT_GUIDE)
        missing = (MISSING[result.options.missing].short if method.uses_windows
                   else "bridged by the filter (every answered item used)")
        self.summary.setText(
            f"Estimator: {method.short}; missing prompts: {missing}; {result.data_used} of "
            f"{fmt(result.n_occasions, 'int')} prompts; standard errors: "
            f"{ERRORS[result.se_method]}; {fmt(result.iterations, 'int')} iterations, "
            f"{result.seconds:.2f} s.")

    def tables(self) -> dict:
        return {"fit figures": self.figures}
