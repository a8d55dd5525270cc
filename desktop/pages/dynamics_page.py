"""The Dynamics page: which lagged paths are free, the innovations, and how to estimate.

For each lag a states x states grid of check boxes frees or fixes each path (row = the
state at prompt t, column = the state at prompt t-lag; the lag-1 diagonal is inertia),
with quick choices all / inertia only / none. Below: the innovation form, how the states
are scaled, the estimator, missing-data handling and the night rule. Every change is one
undoable edit of the session.
"""

from __future__ import annotations

import importlib.util
from dataclasses import replace

import numpy as np
from PySide6.QtCore import Qt, QTimer
from PySide6.QtWidgets import (
    QAbstractItemView, QButtonGroup, QCheckBox, QComboBox, QFormLayout, QGroupBox, QHBoxLayout,
    QHeaderView, QLabel, QPushButton, QRadioButton, QScrollArea, QTableWidget, QTableWidgetItem,
    QVBoxLayout, QWidget,
)

from desktop import style
from desktop.session import Session
from models.errors import LagwiseError
from models.spec import ESTIMATORS, MISSING, ModelSpec, full_mask, inertia_mask

ESTIMATOR_NAMES = {
    "stationary": "Stationary lag windows (recommended)",
    "first-copy-free": "Lag windows, first copy free (no stationarity assumed)",
    "exact": "Exact likelihood of the whole series (Kalman filter)",
}
MISSING_NAMES = {
    "fiml": "Use every answer (full information)",
    "listwise": "Complete lag windows only (listwise)",
}
INNOVATION_NAMES = {
    "free": "Free: innovations may correlate",
    "independent": "Independent: no correlation between innovations",
    "partial": "Partial correlations: choose which pairs are free",
}
CELL = Qt.ItemDataRole.UserRole + 1


def available_estimators() -> tuple[str, ...]:
    """Estimators listed in models.spec.ESTIMATORS that the installed engine can run."""
    engine = {"exact": "models.exact"}
    return tuple(e for e in ESTIMATORS
                 if e not in engine or importlib.util.find_spec(engine[e]) is not None)


class PathGrid(QGroupBox):
    """One lag's states x states grid with quick choices."""

    def __init__(self, lag: int, page: "DynamicsPage") -> None:
        super().__init__(f"Lag {lag}: from prompt t-{lag} to prompt t")
        self.lag = lag
        self._page = page
        layout = QVBoxLayout(self)
        earlier = "one prompt" if lag == 1 else "two prompts"
        explain = QLabel(f"Rows: the state at prompt t. Columns: the state {earlier} earlier. "
                         f"Ticked paths are estimated; the others are fixed at 0."
                         + (" The diagonal is each state's inertia." if lag == 1 else ""))
        explain.setWordWrap(True)
        layout.addWidget(explain)
        self.table = QTableWidget()
        self.table.setObjectName(f"pathGrid{lag}")
        self.table.setAccessibleName(f"Lag {lag} paths: row state at t, column state at t-{lag}")
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Stretch)
        self.table.verticalHeader().setDefaultSectionSize(32)
        self.table.itemChanged.connect(self._toggled)
        layout.addWidget(self.table)
        quick = QHBoxLayout()
        quick.addWidget(QLabel("Quick choice:"))
        self.all_button = QPushButton("All paths")
        self.inertia_button = QPushButton("Inertia only" if lag == 1 else "Same state only")
        self.none_button = QPushButton("None")
        for button, kind in ((self.all_button, "all"), (self.inertia_button, "inertia"),
                             (self.none_button, "none")):
            button.clicked.connect(lambda _=False, kind=kind: page.quick_choice(self.lag, kind))
            quick.addWidget(button)
        quick.addStretch(1)
        layout.addLayout(quick)
        self._syncing = False

    def show_mask(self, spec: ModelSpec) -> None:
        self._syncing = True
        names = spec.state_names
        mask = spec.path_mask(self.lag)
        self.table.clear()
        self.table.setRowCount(len(names))
        self.table.setColumnCount(len(names))
        self.table.setVerticalHeaderLabels([f"{n} (t)" for n in names])
        self.table.setHorizontalHeaderLabels([f"{n} (t-{self.lag})" for n in names])
        for i, to in enumerate(names):
            for j, fr in enumerate(names):
                inertia = self.lag == 1 and i == j
                cell = QTableWidgetItem("inertia" if inertia else "")
                cell.setFlags(Qt.ItemFlag.ItemIsEnabled | Qt.ItemFlag.ItemIsUserCheckable
                              | Qt.ItemFlag.ItemIsSelectable)
                cell.setCheckState(Qt.CheckState.Checked if mask[i, j] else Qt.CheckState.Unchecked)
                cell.setData(CELL, (i, j))
                what = (f"inertia of {to}" if inertia else
                        f"effect of {fr} at t-{self.lag} on {to} at t")
                cell.setToolTip(what[0].upper() + what[1:])
                self.table.setItem(i, j, cell)
        self.table.setFixedHeight(self.table.horizontalHeader().height()
                                  + sum(self.table.rowHeight(r) for r in range(len(names))) + 6)
        self._syncing = False

    def _toggled(self, cell: QTableWidgetItem) -> None:
        if not self._syncing and cell.data(CELL) is not None:
            i, j = cell.data(CELL)
            self._page.set_path(self.lag, i, j, cell.checkState() == Qt.CheckState.Checked)


class DynamicsPage(QWidget):
    """Edit lags, paths, innovations and estimator settings (see the module docstring)."""

    def __init__(self, session: Session, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("dynamicsPage")
        self._session = session
        self._syncing = False
        self._night_error = ""
        self._build()
        self._refresh_timer = QTimer(self)
        self._refresh_timer.setSingleShot(True)
        self._refresh_timer.setInterval(0)
        self._refresh_timer.timeout.connect(self.refresh)
        for signal in (session.specChanged, session.optionsChanged, session.dataChanged):
            signal.connect(self._refresh_timer.start)
        self.refresh()

    # ----- building ------------------------------------------------------------------
    def _build(self) -> None:
        outer = QVBoxLayout(self)
        title = QLabel("Dynamics")
        title.setFont(style.heading_font(self.font()))
        outer.addWidget(title)
        scroll = QScrollArea()
        scroll.setWidgetResizable(True)
        scroll.setFrameShape(QScrollArea.Shape.NoFrame)
        outer.addWidget(scroll, 1)
        body = QWidget()
        scroll.setWidget(body)
        columns = QHBoxLayout(body)
        left = QVBoxLayout()
        right = QVBoxLayout()
        columns.addLayout(left, 3)
        columns.addLayout(right, 2)

        lag_box = QGroupBox("Lag order")
        lag_layout = QHBoxLayout(lag_box)
        self.lag_group = QButtonGroup(self)
        self.lag1 = QRadioButton("&1: from one prompt to the next")
        self.lag2 = QRadioButton("&2: also from two prompts back")
        for value, button in ((1, self.lag1), (2, self.lag2)):
            self.lag_group.addButton(button, value)
            lag_layout.addWidget(button)
        lag_layout.addStretch(1)
        self.lag_group.idClicked.connect(self._lag_chosen)
        left.addWidget(lag_box)
        self.grids = {1: PathGrid(1, self), 2: PathGrid(2, self)}
        for grid in self.grids.values():
            left.addWidget(grid)
        self.empty_label = QLabel("Add states on the States page first.")
        self.empty_label.setStyleSheet(f"color: {style.MUTED};")
        left.addWidget(self.empty_label)
        left.addStretch(1)

        innovation_box = QGroupBox("Innovations (what is new at each prompt)")
        innovation_layout = QVBoxLayout(innovation_box)
        self.innovation_combo = QComboBox()
        self.innovation_combo.setAccessibleName("Innovation form")
        for key, text in INNOVATION_NAMES.items():
            self.innovation_combo.addItem(text, key)
        self.innovation_combo.currentIndexChanged.connect(self._innovation_chosen)
        innovation_layout.addWidget(self.innovation_combo)
        self.partial_label = QLabel("Ticked pairs have a free partial correlation; the others "
                                    "are fixed at 0.")
        self.partial_label.setWordWrap(True)
        innovation_layout.addWidget(self.partial_label)
        self.partial_table = QTableWidget()
        self.partial_table.setObjectName("partialGrid")
        self.partial_table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.partial_table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Stretch)
        self.partial_table.verticalHeader().setDefaultSectionSize(32)
        self.partial_table.itemChanged.connect(self._partial_toggled)
        innovation_layout.addWidget(self.partial_table)
        right.addWidget(innovation_box)

        scale_box = QGroupBox("Scale of each state")
        scale_layout = QVBoxLayout(scale_box)
        self.scale_group = QButtonGroup(self)
        self.marker_radio = QRadioButton("Marker item: its loading is fixed at 1")
        self.variance_radio = QRadioButton("Innovation variance fixed at 1")
        self.scale_group.addButton(self.marker_radio, 0)
        self.scale_group.addButton(self.variance_radio, 1)
        scale_layout.addWidget(self.marker_radio)
        scale_layout.addWidget(self.variance_radio)
        self.scale_group.idClicked.connect(self._scale_chosen)
        right.addWidget(scale_box)

        estimate_box = QGroupBox("Estimation")
        form = QFormLayout(estimate_box)
        self.estimator_combo = QComboBox()
        self.estimator_combo.setAccessibleName("Estimator")
        for key in available_estimators():
            self.estimator_combo.addItem(ESTIMATOR_NAMES.get(key, key), key)
        self.estimator_combo.currentIndexChanged.connect(self._options_chosen)
        form.addRow("&Estimator:", self.estimator_combo)
        self.missing_combo = QComboBox()
        self.missing_combo.setAccessibleName("Missing prompts")
        for key in MISSING:
            self.missing_combo.addItem(MISSING_NAMES.get(key, key), key)
        self.missing_combo.currentIndexChanged.connect(self._options_chosen)
        form.addRow("&Missed prompts:", self.missing_combo)
        self.night_check = QCheckBox("Days are &independent: no lag window spans a night")
        self.night_check.setToolTip("When ticked, the last prompt of a day is not linked to the "
                                    "first prompt of the next day (common practice).")
        self.night_check.toggled.connect(self._night_toggled)
        form.addRow(self.night_check)
        self.night_note = QLabel()
        self.night_note.setWordWrap(True)
        self.night_note.setStyleSheet(f"color: {style.MUTED};")
        form.addRow(self.night_note)
        right.addWidget(estimate_box)
        self.problem_label = QLabel()
        self.problem_label.setObjectName("dynamicsMessages")
        self.problem_label.setWordWrap(True)
        right.addWidget(self.problem_label)
        right.addStretch(1)

    # ----- showing the session -------------------------------------------------------
    def refresh(self) -> None:
        self._syncing = True
        try:
            spec, options = self._session.spec, self._session.options
            has_states = spec.k > 0
            self.lag_group.button(max(spec.lags, 1)).setChecked(True)
            for lag, grid in self.grids.items():
                grid.setVisible(has_states and lag <= spec.lags)
                if has_states and lag <= spec.lags:
                    grid.show_mask(spec)
            self.empty_label.setVisible(not has_states)
            _select(self.innovation_combo, spec.innovations)
            self._fill_partial(spec)
            (self.marker_radio if spec.identification == "marker"
             else self.variance_radio).setChecked(True)
            _select(self.estimator_combo, options.estimator)
            _select(self.missing_combo, options.missing)
            settings = self._session.import_settings
            self.night_check.setChecked(settings is None or settings.time.days_independent)
            self.night_check.setEnabled(settings is not None and settings.time.mode != "order")
            if self._night_error:
                self.night_note.setText(f"<span style='color:{style.WARNING}'>"
                                        f"{self._night_error}</span>")
                self._night_error = ""
            elif settings is not None and settings.time.mode == "order":
                self.night_note.setText("The diary has no day or time column: all prompts "
                                        "form one run.")
            else:
                self.night_note.setText("")
            _, problem = self._session.validation()
            self.problem_label.setText(
                "" if problem is None or self._session.diary is None else
                f"<span style='color:{style.WARNING}'><b>To fix before estimating:</b> "
                f"{problem}</span>")
        finally:
            self._syncing = False

    def _fill_partial(self, spec: ModelSpec) -> None:
        partial = spec.innovations == "partial" and spec.k > 1
        self.partial_label.setVisible(partial)
        self.partial_table.setVisible(partial)
        if not partial:
            return
        names = spec.state_names
        zeros = {frozenset(z) for z in spec.partial_zeros}
        table = self.partial_table
        table.clear()
        table.setRowCount(len(names))
        table.setColumnCount(len(names))
        table.setHorizontalHeaderLabels(list(names))
        table.setVerticalHeaderLabels(list(names))
        for i, a in enumerate(names):
            for j, b in enumerate(names):
                cell = QTableWidgetItem()
                if i < j:
                    cell.setFlags(Qt.ItemFlag.ItemIsEnabled | Qt.ItemFlag.ItemIsUserCheckable)
                    free = frozenset((a, b)) not in zeros
                    cell.setCheckState(Qt.CheckState.Checked if free else Qt.CheckState.Unchecked)
                    cell.setData(CELL, (a, b))
                else:
                    cell.setFlags(Qt.ItemFlag.NoItemFlags)
                table.setItem(i, j, cell)
        table.setFixedHeight(table.horizontalHeader().height()
                             + sum(table.rowHeight(r) for r in range(len(names))) + 6)

    # ----- edits ---------------------------------------------------------------------
    def set_path(self, lag: int, i: int, j: int, free: bool) -> None:
        spec = self._session.spec
        mask = spec.path_mask(lag).copy()
        mask[i, j] = free
        to, fr = spec.state_names[i], spec.state_names[j]
        what = f"inertia of {to}" if lag == 1 and i == j else f"path {fr} → {to} (lag {lag})"
        self._session.edit_spec(spec.with_paths(lag, mask),
                                f"{'Free' if free else 'Fix'} {what}")

    def quick_choice(self, lag: int, kind: str) -> None:
        spec = self._session.spec
        k = spec.k
        mask = {"all": full_mask(k), "inertia": inertia_mask(k), "none": full_mask(k, False)}[kind]
        self._session.edit_spec(spec.with_paths(lag, np.array(mask, dtype=bool).reshape(k, k)),
                                f"Lag {lag}: {kind} paths")

    def set_lags(self, lags: int) -> None:
        self._session.edit_spec(self._session.spec.with_lags(lags), f"Lag order {lags}")

    def _lag_chosen(self, lags: int) -> None:
        if not self._syncing:
            self.set_lags(lags)

    def _innovation_chosen(self) -> None:
        if self._syncing:
            return
        form = self.innovation_combo.currentData()
        self._session.edit_spec(replace(self._session.spec, innovations=form),
                                f"Innovations: {form}")

    def _partial_toggled(self, cell: QTableWidgetItem) -> None:
        if self._syncing or cell.data(CELL) is None:
            return
        a, b = cell.data(CELL)
        spec = self._session.spec
        zeros = tuple(z for z in spec.partial_zeros if frozenset(z) != frozenset((a, b)))
        if cell.checkState() != Qt.CheckState.Checked:
            zeros += ((a, b),)
        verb = "Free" if cell.checkState() == Qt.CheckState.Checked else "Fix at 0"
        self._session.edit_spec(replace(spec, partial_zeros=zeros),
                                f"{verb} partial correlation {a} – {b}")

    def _scale_chosen(self, which: int) -> None:
        if self._syncing:
            return
        identification = "marker" if which == 0 else "variance"
        self._session.edit_spec(replace(self._session.spec, identification=identification),
                                f"Scale: {identification}")

    def _options_chosen(self) -> None:
        if self._syncing:
            return
        options = replace(self._session.options, estimator=self.estimator_combo.currentData(),
                          missing=self.missing_combo.currentData())
        self._session.edit_options(options, "Estimation settings")

    def _night_toggled(self, independent: bool) -> None:
        settings = self._session.import_settings
        if self._syncing or settings is None:
            return
        time = replace(settings.time, days_independent=independent)
        try:
            self._session.edit_time(time, "Days independent" if independent
                                    else "Days joined across nights")
        except LagwiseError as exc:
            self._night_error = str(exc)
            self._refresh_timer.start()


def _select(combo: QComboBox, key: str) -> None:
    index = combo.findData(key)
    if index >= 0:
        combo.setCurrentIndex(index)
