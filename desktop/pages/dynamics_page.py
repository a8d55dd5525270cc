"""The Dynamics page: which lagged paths are free, the innovations, and how to estimate.

For each lag a states x states grid of check boxes frees or fixes each path (row = the
state at prompt t, column = the state at prompt t-lag; the lag-1 diagonal is inertia),
with quick choices all / inertia only / none. Below: the innovation form, how the states
are scaled, the estimator (each explained in plain words), the lag-window settings (missed
prompts, window length; disabled for the exact estimator, which uses no windows) and the
night rule: whether days are separate segments, and for the exact estimator whether the
states restart each day or carry over the night as a number of missed prompts. Every change
is one undoable edit of the session.
"""

from __future__ import annotations

from dataclasses import replace
from html import escape

import numpy as np
from PySide6.QtCore import Qt, QTimer
from PySide6.QtGui import QAction
from PySide6.QtWidgets import (
    QAbstractItemView, QButtonGroup, QCheckBox, QComboBox, QDoubleSpinBox, QFormLayout, QGroupBox,
    QHBoxLayout, QHeaderView, QLabel, QPushButton, QRadioButton, QScrollArea, QSpinBox, QTableWidget,
    QTableWidgetItem, QToolButton, QVBoxLayout, QWidget,
)

from lagwise.desktop import style
from lagwise.desktop.session import Session
from lagwise.models.errors import LagwiseError
from lagwise.models.estimators import ERRORS, ESTIMATORS, INTERVAL_UNITS, MISSING, FitOptions
from lagwise.models.spec import ModelSpec, full_mask, inertia_mask

WINDOW_ONLY_TIP = ("The exact estimator follows the whole series with the Kalman filter: it uses "
                   "no lag windows and bridges missed prompts itself, so this setting does not "
                   "apply.")
EXACT_ONLY_TIP = ("Only the exact estimator can carry the states over a night; lag windows use "
                  "the box above.")
CONTINUOUS_ONLY_TIP = "Only the continuous-time estimator takes these settings."
NIGHT_GAP_DEFAULT = 6
NIGHT_GAP_TIP = ("How many prompts the night would hold at the day's rhythm. For example 10 "
                 "prompts over 15 waking hours (one every 90 minutes) and 9 hours of sleep: "
                 "about 6. The longer the night, the less of the evening carries over to the "
                 "morning.")
INNOVATION_NAMES = {
    "free": "Free: innovations may correlate",
    "independent": "Independent: no correlation between innovations",
    "partial": "Partial correlations: choose which pairs are free",
}
CELL = Qt.ItemDataRole.UserRole + 1
NO_PATHS_NOTE = ("No lag-{lag} path is ticked yet, so none will be estimated: tick the paths "
                 "above or use a quick choice.")
COMBO_CHARACTERS = 24   # combo boxes show this many characters; the full text is in the list


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
        self.empty_note = QLabel(NO_PATHS_NOTE.format(lag=lag))
        self.empty_note.setObjectName(f"noPathsNote{lag}")
        self.empty_note.setWordWrap(True)
        self.empty_note.setStyleSheet(f"color: {style.NOTE};")
        layout.addWidget(self.empty_note)
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
                cell.setToolTip(style.plain(what[0].upper() + what[1:]))
                self.table.setItem(i, j, cell)
        self.table.setFixedHeight(self.table.horizontalHeader().height()
                                  + sum(self.table.rowHeight(r) for r in range(len(names))) + 6)
        self.empty_note.setVisible(not mask.any())
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
        head = QHBoxLayout()
        head.addWidget(title)
        head.addStretch(1)
        self.estimate_button = QToolButton()
        self.estimate_button.setObjectName("estimateButton")
        self.estimate_button.setText("Estimate")
        self.estimate_button.setEnabled(False)
        self.estimate_button.setToolButtonStyle(Qt.ToolButtonStyle.ToolButtonTextOnly)
        self.estimate_button.setStyleSheet(
            f"QToolButton {{ background: {style.POSITIVE}; color: {style.PAPER}; font-weight: bold;"
            f" border: none; border-radius: 4px; padding: 7px 22px; }}"
            f"QToolButton:hover {{ background: #176d68; }}"
            f"QToolButton:disabled {{ background: {style.RULE}; color: {style.MUTED}; }}")
        head.addWidget(self.estimate_button)
        outer.addLayout(head)
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
        self.innovation_combo = _combo()
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
        self.estimator_combo = _combo()
        self.estimator_combo.setAccessibleName("Estimator")
        for key, method in ESTIMATORS.items():
            self.estimator_combo.addItem(method.label, key)
            self.estimator_combo.setItemData(self.estimator_combo.count() - 1,
                                             method.help, Qt.ItemDataRole.ToolTipRole)
        self.estimator_combo.currentIndexChanged.connect(self._estimator_chosen)
        form.addRow("&Estimator:", self.estimator_combo)
        self.estimator_help = _note()
        self.estimator_help.setObjectName("estimatorHelp")
        form.addRow(self.estimator_help)
        self.missing_combo = _combo()
        self.missing_combo.setAccessibleName("Missing prompts")
        for key, handling in MISSING.items():
            self.missing_combo.addItem(handling.label, key)
        self.missing_combo.currentIndexChanged.connect(self._options_chosen)
        self.missing_label = QLabel("&Missed prompts:")
        self.missing_label.setBuddy(self.missing_combo)
        form.addRow(self.missing_label, self.missing_combo)
        self.errors_combo = _combo()
        self.errors_combo.setAccessibleName("Standard errors")
        for key, words in ERRORS.items():
            self.errors_combo.addItem(words[:1].upper() + words[1:], key)
        self.errors_combo.currentIndexChanged.connect(self._options_chosen)
        self.errors_label = QLabel("Standard e&rrors:")
        self.errors_label.setBuddy(self.errors_combo)
        form.addRow(self.errors_label, self.errors_combo)
        self.depth_combo = _combo()
        self.depth_combo.setAccessibleName("Prompts per lag window")
        self.depth_combo.currentIndexChanged.connect(self._options_chosen)
        self.depth_label = QLabel("Lag &window:")
        self.depth_label.setBuddy(self.depth_combo)
        form.addRow(self.depth_label, self.depth_combo)
        self.night_check = QCheckBox("Days are &independent: no lag window spans a night")
        self.night_check.toggled.connect(self._night_toggled)
        form.addRow(self.night_check)
        self.night_note = _note()
        form.addRow(self.night_note)

        self.exact_night = QWidget()
        exact_layout = QVBoxLayout(self.exact_night)
        exact_layout.setContentsMargins(0, 4, 0, 0)
        exact_layout.setSpacing(4)
        exact_layout.addWidget(QLabel("Over the night (exact estimator):"))
        self.exact_night_group = QButtonGroup(self)
        self.restart_radio = QRadioButton("&Restart each day: the states start afresh each morning")
        self.restart_radio.setToolTip("At the first prompt of each day the states start from their "
                                      "usual level and spread (common practice).")
        self.carry_radio = QRadioButton("&Carry over the night as")
        self.carry_radio.setToolTip("The states run on through the night, as if this many prompts "
                                    "had been missed between the last prompt of a day and the "
                                    "first of the next.")
        self.night_gap_spin = QSpinBox()
        self.night_gap_spin.setObjectName("nightGap")
        self.night_gap_spin.setAccessibleName("Missed prompts per night")
        self.night_gap_spin.setRange(0, 99)
        self.night_gap_spin.setValue(NIGHT_GAP_DEFAULT)
        self.night_gap_spin.setKeyboardTracking(False)  # one edit per typed number
        self.night_gap_spin.setToolTip(NIGHT_GAP_TIP)
        self.night_gap_spin.valueChanged.connect(self._night_gap_changed)
        self.exact_night_group.addButton(self.restart_radio, 0)
        self.exact_night_group.addButton(self.carry_radio, 1)
        self.exact_night_group.idClicked.connect(self._night_rule_chosen)
        exact_layout.addWidget(self.restart_radio)
        carry_row = QHBoxLayout()
        carry_row.addWidget(self.carry_radio)
        carry_row.addWidget(self.night_gap_spin)
        carry_row.addWidget(QLabel("missed prompts"))
        carry_row.addStretch(1)
        exact_layout.addLayout(carry_row)
        self.exact_night_note = _note()
        exact_layout.addWidget(self.exact_night_note)
        form.addRow(self.exact_night)
        self._build_continuous(form)
        right.addWidget(estimate_box)
        self.problem_label = QLabel()
        self.problem_label.setObjectName("dynamicsMessages")
        self.problem_label.setWordWrap(True)
        right.addWidget(self.problem_label)
        right.addStretch(1)

    def _build_continuous(self, form: QFormLayout) -> None:
        """The continuous-time settings: the drift's time unit, the prompts' spacing (diaries
        with day and prompt numbers) and the night (diaries with times)."""
        self.ct_box = QWidget()
        self.ct_box.setToolTip(CONTINUOUS_ONLY_TIP)
        rows = QVBoxLayout(self.ct_box)
        rows.setContentsMargins(0, 4, 0, 0)
        rows.setSpacing(4)
        rows.addWidget(QLabel("Continuous time:"))
        line = QHBoxLayout()
        self.unit_combo = _combo()
        self.unit_combo.setAccessibleName("Interval unit")
        for unit in INTERVAL_UNITS:
            self.unit_combo.addItem(f"drift per {unit[:-1]}", unit)
        self.unit_combo.currentIndexChanged.connect(self._continuous_chosen)
        self.spacing_spin = QDoubleSpinBox()
        self.spacing_spin.setAccessibleName("Prompt spacing")
        self.spacing_spin.setRange(0.0, 1e6)
        self.spacing_spin.setDecimals(3)
        self.spacing_spin.setSpecialValueText("not stated")
        self.spacing_spin.setKeyboardTracking(False)
        self.spacing_spin.setToolTip("Diaries with day and prompt numbers: the time between two "
                                     "prompts, in the unit chosen beside it.")
        self.spacing_spin.valueChanged.connect(self._continuous_chosen)
        line.addWidget(self.unit_combo)
        line.addWidget(QLabel("prompts apart:"))
        line.addWidget(self.spacing_spin)
        line.addStretch(1)
        rows.addLayout(line)
        self.ct_carry_check = QCheckBox("Carry the states over the real night length")
        self.ct_carry_check.setToolTip("Needs the time of each prompt. Unticked: the states "
                                       "restart each day.")
        self.ct_carry_check.toggled.connect(self._continuous_chosen)
        rows.addWidget(self.ct_carry_check)
        form.addRow(self.ct_box)

    def _show_continuous(self, options: FitOptions, mode: str | None) -> None:
        continuous = options.method.continuous
        self.ct_box.setEnabled(continuous)
        self.ct_box.setToolTip("" if continuous else CONTINUOUS_ONLY_TIP)
        _select(self.unit_combo, options.interval_unit or "hours")
        self.spacing_spin.setValue(options.prompt_spacing or 0.0)
        self.spacing_spin.setEnabled(mode != "timestamp")
        self.ct_carry_check.setChecked(options.night == "carry")
        self.ct_carry_check.setEnabled(mode == "timestamp")

    def _continuous_chosen(self) -> None:
        if self._syncing or not self._session.options.method.continuous:
            return
        options = replace(self._session.options, interval_unit=self.unit_combo.currentData(),
                          prompt_spacing=self.spacing_spin.value() or None,
                          night="carry" if self.ct_carry_check.isChecked() else None)
        self._session.edit_options(options, "Continuous-time settings")

    def set_estimate_action(self, action: QAction) -> None:
        """The window's Estimate action, which the page's Estimate button triggers and follows."""
        self.estimate_button.setDefaultAction(action)

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
            self.estimator_help.setText(options.method.help)
            _select(self.missing_combo, options.missing)
            _select(self.errors_combo, options.standard_errors)
            choice = len(options.method.errors) > 1
            self.errors_combo.setEnabled(choice)
            self.errors_label.setEnabled(choice)
            self.errors_combo.setToolTip(
                "Robust errors allow for overlapping windows and for dependence within a day "
                "(recommended); model-based ones treat windows as independent." if choice else
                "The exact estimator's errors come from the likelihood of the whole series.")
            self._fill_depth(spec, options)
            self._show_night_rules(options)
            settings = self._session.import_settings
            self._show_continuous(options, None if settings is None else settings.time.mode)
            _, problem = self._session.validation()
            self.problem_label.setText(
                "" if problem is None or self._session.diary is None else
                f"<span style='color:{style.WARNING}'><b>To fix before estimating:</b> "
                f"{escape(problem)}</span>")
        finally:
            self._syncing = False

    def _fill_depth(self, spec: ModelSpec, options: FitOptions) -> None:
        """Window lengths: as the lag order (default), or one to three prompts more."""
        lags = max(spec.lags, 1)
        combo = self.depth_combo
        combo.clear()
        combo.addItem(f"window of {lags + 1} prompts (as the lag order)", None)
        depths = [lags + 1, lags + 2, lags + 3]
        if options.depth is not None and options.depth not in depths and options.depth != lags:
            depths = sorted({*depths, options.depth})
        for depth in depths:
            combo.addItem(f"window of {depth + 1} prompts", depth)
        chosen = None if options.depth == lags else options.depth
        combo.setCurrentIndex(max(combo.findData(chosen), 0))
        combo.setToolTip("How many consecutive prompts each lag window holds. More than the lag "
                         "order adds information on the dynamics but leaves fewer complete "
                         "windows.")

    def _show_night_rules(self, options: FitOptions) -> None:
        exact = not options.method.uses_windows  # the filter: no windows; its own night rule
        for widget, label in ((self.missing_combo, self.missing_label),
                              (self.depth_combo, self.depth_label)):
            widget.setEnabled(not exact)
            label.setEnabled(not exact)
            if exact:
                widget.setToolTip(WINDOW_ONLY_TIP)
                label.setToolTip(WINDOW_ONLY_TIP)
            else:
                label.setToolTip("")
        if not exact:
            self.missing_combo.setToolTip("How lag windows with a missed prompt are used")
        settings = self._session.import_settings
        has_days = settings is not None and settings.time.mode != "order"
        separate = settings is None or settings.time.days_independent
        self.night_check.setChecked(separate)
        self.night_check.setEnabled(has_days and not exact)
        self.night_check.setToolTip(
            "With the exact estimator the choice below decides what happens over a night."
            if exact else "When ticked, the last prompt of a day is not linked to the first "
                          "prompt of the next day (common practice).")
        if self._night_error:
            self.night_note.setText(f"<span style='color:{style.WARNING}'>"
                                    f"{escape(self._night_error)}</span>")
            self._night_error = ""
        elif settings is not None and settings.time.mode == "order":
            self.night_note.setText("The diary has no day or time column: all prompts "
                                    "form one run.")
        else:
            self.night_note.setText("")
        self.night_note.setVisible(bool(self.night_note.text()))
        carries = "night_gap" in options.method.settings
        self.exact_night.setEnabled(carries and has_days)
        self.exact_night.setToolTip("" if carries else EXACT_ONLY_TIP)
        self.exact_night_group.setExclusive(False)
        self.restart_radio.setChecked(carries and separate and options.night_gap is None)
        self.carry_radio.setChecked(carries and separate and options.night_gap is not None)
        self.exact_night_group.setExclusive(True)
        if options.night_gap is not None:
            self.night_gap_spin.setValue(options.night_gap)
        if exact and has_days and not separate:
            self.exact_night_note.setText(
                "The days are joined into one run, so the states go straight through every "
                "night with no prompt missed between. Choose a rule above to treat the nights "
                "apart.")
        else:
            self.exact_night_note.setText("")
        self.exact_night_note.setVisible(bool(self.exact_night_note.text()))

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

    def _estimator_chosen(self) -> None:
        if self._syncing:
            return
        estimator = self.estimator_combo.currentData()
        options = self._session.options.for_estimator(estimator)
        self._session.edit_options(options, f"Estimator: {estimator}")

    def _options_chosen(self) -> None:
        if self._syncing:
            return
        current = self._session.options
        errors = self.errors_combo.currentData()
        options = replace(current, missing=self.missing_combo.currentData(),
                          depth=self.depth_combo.currentData(),
                          se=None if errors == current.method.errors[0] or
                          errors not in current.method.errors else errors)
        self._session.edit_options(options, "Lag-window settings")

    def set_night_rule(self, night_gap: int | None) -> None:
        """Exact estimator: restart each day (None) or carry over the night as `night_gap`
        missed prompts. Days joined into one run are first made separate again; both edits
        are one undo step."""
        session = self._session
        settings = session.import_settings
        text = ("Night rule: restart each day" if night_gap is None
                else f"Night rule: carry over as {night_gap} missed prompts")
        session.undo_stack.beginMacro(text)
        try:
            if settings is not None and not settings.time.days_independent:
                session.edit_time(replace(settings.time, days_independent=True), text)
            session.edit_options(replace(session.options, night_gap=night_gap), text)
        except LagwiseError as exc:
            self._night_error = str(exc)
        finally:
            session.undo_stack.endMacro()
        self._refresh_timer.start()

    def _night_rule_chosen(self, which: int) -> None:
        if not self._syncing:
            self.set_night_rule(None if which == 0 else self.night_gap_spin.value())

    def _night_gap_changed(self, value: int) -> None:
        if not self._syncing and self.carry_radio.isChecked():
            self.set_night_rule(value)

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


def _note() -> QLabel:
    label = QLabel()
    label.setWordWrap(True)
    label.setStyleSheet(f"color: {style.MUTED};")
    return label


def _combo() -> QComboBox:
    """A combo box as wide as COMBO_CHARACTERS, whatever its longest choice (the page fits
    the window; the open list shows every choice in full)."""
    combo = QComboBox()
    combo.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
    combo.setMinimumContentsLength(COMBO_CHARACTERS)
    return combo


def _select(combo: QComboBox, key: str) -> None:
    index = combo.findData(key)
    if index >= 0:
        combo.setCurrentIndex(index)
