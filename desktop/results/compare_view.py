"""The Compare tab: two or more runs side by side (models.compare.compare).

Shows the likelihood-ratio test of every nested pair as a sentence, what is not comparable,
and one table of the fit figures and every parameter with one column per run and, for each
later run, its difference from the first; the table exports as CSV like the other results
tables. Every number is the comparison's, formatted by models.numbers.fmt.
"""

from __future__ import annotations

from PySide6.QtCore import Qt

from lagwise.desktop.results.tables import Column, RecordsModel
from lagwise.desktop.results.widgets import ResultsPanel, note_label, table_view
from lagwise.models.compare import Comparison, compare
from lagwise.models.runs import Run

EMPTY = "Select two or more runs on the Runs tab and press Compare."
NO_TEST = ("No likelihood-ratio test: no pair of these runs is nested (the same data and "
           "preparation, estimator and items, one model's free parameters within the "
           "other's).")


class ComparePanel(ResultsPanel):
    """Runs side by side (see the module docstring); `show_runs` fills it."""

    name = "compare"

    def __init__(self, parent=None) -> None:
        super().__init__("Compare runs", parent)
        self.comparison: Comparison | None = None
        self.tests_label = note_label(EMPTY)
        self.tests_label.setObjectName("compareTests")
        self.tests_label.setTextFormat(Qt.TextFormat.PlainText)
        self.tests_label.setStyleSheet("")
        self.notes_label = note_label()
        self.notes_label.setTextFormat(Qt.TextFormat.PlainText)
        self.notes_label.hide()
        self.model = RecordsModel(())
        self.table = table_view(self.model, stretch_last=False)
        self.table.setObjectName("compareTable")
        for widget in (self.tests_label, self.notes_label):
            self.body.addWidget(widget)
        self.body.addWidget(self.table, 1)

    def show_runs(self, runs: tuple[Run, ...]) -> None:
        """Compare `runs` (two or more, in this order)."""
        comparison = compare(runs)
        self.comparison = comparison
        self.tests_label.setText("\n".join(t.sentence for t in comparison.tests) or NO_TEST)
        self.notes_label.setText("\n".join(comparison.notes))
        self.notes_label.setVisible(bool(comparison.notes))
        columns = [Column(title, lambda row, j=j: row[j], "text" if j < 2 else "figure")
                   for j, title in enumerate(comparison.header())]
        self.model = RecordsModel(columns, comparison.table())
        self.table.setModel(self.model)

    def clear(self) -> None:
        """Back to the empty tab (runs compared before are gone or changed)."""
        self.comparison = None
        self.tests_label.setText(EMPTY)
        self.notes_label.hide()
        self.model = RecordsModel(())
        self.table.setModel(self.model)

    def tables(self) -> dict:
        return {} if self.comparison is None else {"comparison": self.model}
