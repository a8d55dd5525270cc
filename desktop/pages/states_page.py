"""The States page: which items measure which latent state.

States are created, renamed and deleted here; items are assigned by dragging them from
the item list onto a state, or with the items x states grid of check boxes; each state's
marker item (loading fixed at 1) is chosen under the grid. Every change is one undoable
edit of the session's ModelSpec, and the model's validation messages are shown live.
"""

from __future__ import annotations

from dataclasses import replace

from PySide6.QtCore import QMimeData, Qt, QTimer
from PySide6.QtGui import QBrush, QColor, QKeySequence, QShortcut
from PySide6.QtWidgets import (
    QAbstractItemView, QComboBox, QGroupBox, QHBoxLayout, QHeaderView, QLabel, QListWidget,
    QListWidgetItem, QPushButton, QSplitter, QTableWidget, QTableWidgetItem, QTreeWidget,
    QTreeWidgetItem, QVBoxLayout, QWidget,
)

from lagwise.desktop import style
from lagwise.desktop.session import Session
from lagwise.models.spec import ModelSpec, State

ITEMS_MIME = "application/x-lagwise-items"
NAME_ROLE = Qt.ItemDataRole.UserRole + 1


# ----- spec edits (each returns a new immutable ModelSpec) ----------------------------
def add_state(spec: ModelSpec, name: str) -> ModelSpec:
    """A new, empty state; its paths start free."""
    return spec.with_states(spec.states + (State(name, ()),))


def rename_state(spec: ModelSpec, old: str, new: str) -> ModelSpec:
    """Rename a state; its paths and partial-correlation choices stay (by position)."""
    states = tuple(replace(s, name=new) if s.name == old else s for s in spec.states)
    zeros = tuple(tuple(new if n == old else n for n in pair) for pair in spec.partial_zeros)
    return replace(spec, states=states, partial_zeros=zeros)


def delete_state(spec: ModelSpec, name: str) -> ModelSpec:
    return _tidy(spec.with_states(tuple(s for s in spec.states if s.name != name)))


def assign_item(spec: ModelSpec, state: str, item: str, on: bool = True) -> ModelSpec:
    """Add `item` to (or remove it from) `state`; a removed marker falls back to the first item."""
    states = []
    for s in spec.states:
        if s.name == state:
            items = s.items
            if on and item not in items:
                items = items + (item,)
            elif not on:
                items = tuple(i for i in items if i != item)
            marker = s.marker if s.marker in items else None
            s = State(s.name, items, marker)
        states.append(s)
    return _tidy(replace(spec, states=tuple(states)))


def move_item(spec: ModelSpec, item: str, source: str, target: str) -> ModelSpec:
    return assign_item(assign_item(spec, source, item, False), target, item, True)


def set_marker(spec: ModelSpec, state: str, item: str) -> ModelSpec:
    states = tuple(State(s.name, s.items, item) if s.name == state else s for s in spec.states)
    return replace(spec, states=states)


def _tidy(spec: ModelSpec) -> ModelSpec:
    """Drop settings for items no state uses any more."""
    used = set(spec.items)
    return replace(spec,
                   reliability=tuple((i, r) for i, r in spec.reliability if i in used),
                   unique_autocorrelation=tuple(i for i in spec.unique_autocorrelation
                                                if i in used))


def new_state_name(spec: ModelSpec) -> str:
    names = set(spec.state_names)
    n = len(names) + 1
    while f"State {n}" in names:
        n += 1
    return f"State {n}"


# ----- widgets -----------------------------------------------------------------------
class _ItemList(QListWidget):
    """The diary's items; drag one or more onto a state."""

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.setSelectionMode(QAbstractItemView.SelectionMode.ExtendedSelection)
        self.setDragEnabled(True)
        self.setDragDropMode(QAbstractItemView.DragDropMode.DragOnly)

    def mimeData(self, items) -> QMimeData:
        data = QMimeData()
        names = "\n".join(i.data(NAME_ROLE) for i in items)
        data.setData(ITEMS_MIME, names.encode("utf-8"))
        data.setText(names)
        return data

    def mimeTypes(self) -> list[str]:
        return [ITEMS_MIME]


class _StateTree(QTreeWidget):
    """States with their items; accepts items dropped from the list or from another state."""

    def __init__(self, page: "StatesPage") -> None:
        super().__init__(page)
        self._page = page
        self.setHeaderLabels(["States and their items"])
        self.setDragEnabled(True)
        self.setAcceptDrops(True)
        self.setDropIndicatorShown(True)
        self.setDragDropMode(QAbstractItemView.DragDropMode.DragDrop)
        self.setDefaultDropAction(Qt.DropAction.CopyAction)

    def mimeTypes(self) -> list[str]:
        return [ITEMS_MIME]

    def mimeData(self, items) -> QMimeData:
        data = QMimeData()
        pairs = [f"{i.parent().data(0, NAME_ROLE)}\t{i.data(0, NAME_ROLE)}"
                 for i in items if i.parent() is not None]
        data.setData(ITEMS_MIME, "\n".join(i.split("\t")[1] for i in pairs).encode("utf-8"))
        data.setData(ITEMS_MIME + "-from", "\n".join(pairs).encode("utf-8"))
        return data

    def supportedDropActions(self):
        return Qt.DropAction.CopyAction | Qt.DropAction.MoveAction

    def dragEnterEvent(self, event) -> None:
        if event.mimeData().hasFormat(ITEMS_MIME):
            event.acceptProposedAction()
        else:
            event.ignore()

    def dragMoveEvent(self, event) -> None:
        target = self.itemAt(event.position().toPoint())
        if event.mimeData().hasFormat(ITEMS_MIME) and target is not None:
            event.acceptProposedAction()
        else:
            event.ignore()

    def dropEvent(self, event) -> None:
        target = self.itemAt(event.position().toPoint())
        data = event.mimeData()
        if target is None or not data.hasFormat(ITEMS_MIME):
            event.ignore()
            return
        state_item = target if target.parent() is None else target.parent()
        state = state_item.data(0, NAME_ROLE)
        moved = bytes(data.data(ITEMS_MIME + "-from")).decode("utf-8")
        if moved:
            pairs = [line.split("\t") for line in moved.splitlines()]
            self._page.drop_items(state, [item for _, item in pairs], [src for src, _ in pairs])
        else:
            names = bytes(data.data(ITEMS_MIME)).decode("utf-8").splitlines()
            self._page.drop_items(state, names)
        event.setDropAction(Qt.DropAction.CopyAction)
        event.accept()


class StatesPage(QWidget):
    """Edit the states of the session's ModelSpec (see the module docstring)."""

    def __init__(self, session: Session, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("statesPage")
        self._session = session
        self._syncing = False
        self._markers: dict[str, QComboBox] = {}
        self._build()
        # Redraw after the event that caused the change has finished: a check box or a
        # name being edited must not be deleted inside its own signal.
        self._refresh_timer = QTimer(self)
        self._refresh_timer.setSingleShot(True)
        self._refresh_timer.setInterval(0)
        self._refresh_timer.timeout.connect(self.refresh)
        session.specChanged.connect(self._refresh_timer.start)
        session.dataChanged.connect(self._refresh_timer.start)
        self.refresh()

    # ----- building ------------------------------------------------------------------
    def _build(self) -> None:
        layout = QVBoxLayout(self)
        title = QLabel("States")
        title.setFont(style.heading_font(self.font()))
        layout.addWidget(title)
        intro = QLabel("A state is a latent variable measured by items. Drag items onto a "
                       "state, or tick them in the grid. The marker item sets the state's scale "
                       "(its loading is fixed at 1).")
        intro.setWordWrap(True)
        layout.addWidget(intro)

        splitter = QSplitter(Qt.Orientation.Horizontal)
        splitter.setObjectName("statesSplitter")
        items_box = QGroupBox("Items")
        items_layout = QVBoxLayout(items_box)
        self.item_list = _ItemList()
        self.item_list.setObjectName("itemList")
        self.item_list.setAccessibleName("Items of the diary; drag onto a state")
        items_layout.addWidget(self.item_list)
        splitter.addWidget(items_box)

        states_box = QGroupBox("States")
        states_layout = QVBoxLayout(states_box)
        self.tree = _StateTree(self)
        self.tree.setObjectName("stateTree")
        self.tree.itemChanged.connect(self._tree_edited)
        states_layout.addWidget(self.tree, 1)
        buttons = QHBoxLayout()
        self.add_button = QPushButton("&Add state")
        self.add_button.clicked.connect(self._add_clicked)
        self.rename_button = QPushButton("Re&name")
        self.rename_button.setToolTip("Rename the selected state (F2)")
        self.rename_button.clicked.connect(self._rename_clicked)
        self.delete_button = QPushButton("&Remove")
        self.delete_button.setToolTip("Remove the selected state, or the selected item from its "
                                      "state (Delete)")
        self.delete_button.clicked.connect(self._delete_clicked)
        for b in (self.add_button, self.rename_button, self.delete_button):
            buttons.addWidget(b)
        states_layout.addLayout(buttons)
        QShortcut(QKeySequence(Qt.Key.Key_Delete), self.tree, self._delete_clicked)
        QShortcut(QKeySequence(Qt.Key.Key_F2), self.tree, self._rename_clicked)
        splitter.addWidget(states_box)

        grid_box = QGroupBox("Items × states")
        grid_layout = QVBoxLayout(grid_box)
        self.grid = QTableWidget()
        self.grid.setObjectName("assignmentGrid")
        self.grid.setAccessibleName("Items by states: tick to let the state load on the item")
        self.grid.itemChanged.connect(self._grid_toggled)
        self.grid.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.grid.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Stretch)
        grid_layout.addWidget(self.grid, 1)
        splitter.addWidget(grid_box)
        splitter.setSizes([200, 300, 500])
        layout.addWidget(splitter, 1)

        self.messages = QLabel()
        self.messages.setObjectName("stateMessages")
        self.messages.setWordWrap(True)
        self.messages.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.messages.setMinimumHeight(48)
        self.messages.setAlignment(Qt.AlignmentFlag.AlignTop | Qt.AlignmentFlag.AlignLeft)
        layout.addWidget(self.messages)

    # ----- showing the session -------------------------------------------------------
    def refresh(self) -> None:
        self._syncing = True
        try:
            self._fill_items()
            self._fill_tree()
            self._fill_grid()
            self._show_messages()
        finally:
            self._syncing = False

    def _fill_items(self) -> None:
        spec = self._session.spec
        self.item_list.clear()
        for name in self._session.items:
            owners = [s.name for s in spec.states if name in s.items]
            entry = QListWidgetItem(f"{name}   → {', '.join(owners)}" if owners else name)
            entry.setData(NAME_ROLE, name)
            if not owners:
                entry.setForeground(QBrush(QColor(style.MUTED)))
            self.item_list.addItem(entry)

    def _fill_tree(self) -> None:
        spec = self._session.spec
        selected = self.selected_state()
        self.tree.clear()
        for s in spec.states:
            node = QTreeWidgetItem([s.name])
            node.setData(0, NAME_ROLE, s.name)
            node.setFlags(node.flags() | Qt.ItemFlag.ItemIsEditable | Qt.ItemFlag.ItemIsDropEnabled)
            font = node.font(0)
            font.setBold(True)
            node.setFont(0, font)
            for it in s.items:
                marker = spec.identification == "marker" and it == s.marker_item
                child = QTreeWidgetItem([f"{it}  (marker)" if marker else it])
                child.setData(0, NAME_ROLE, it)
                child.setFlags((child.flags() | Qt.ItemFlag.ItemIsDragEnabled)
                               & ~Qt.ItemFlag.ItemIsEditable)
                node.addChild(child)
            self.tree.addTopLevelItem(node)
            node.setExpanded(True)
            if s.name == selected:
                self.tree.setCurrentItem(node)

    def _fill_grid(self) -> None:
        spec = self._session.spec
        items = list(self._session.items)
        items += [it for it in spec.items if it not in items]  # unknown items stay visible
        states = spec.states
        self.grid.clear()
        self._markers.clear()
        self.grid.setRowCount(len(items) + (1 if states else 0))
        self.grid.setColumnCount(len(states))
        self.grid.setHorizontalHeaderLabels([s.name for s in states])
        self.grid.setVerticalHeaderLabels(items + (["marker item"] if states else []))
        for r, it in enumerate(items):
            for c, s in enumerate(states):
                cell = QTableWidgetItem()
                cell.setFlags(Qt.ItemFlag.ItemIsEnabled | Qt.ItemFlag.ItemIsUserCheckable
                              | Qt.ItemFlag.ItemIsSelectable)
                cell.setCheckState(Qt.CheckState.Checked if it in s.items
                                   else Qt.CheckState.Unchecked)
                cell.setData(NAME_ROLE, (s.name, it))
                cell.setToolTip(style.plain(f"{s.name} is measured by {it}" if it in s.items
                                            else f"Tick to let {s.name} be measured by {it}"))
                self.grid.setItem(r, c, cell)
        if states:
            row = len(items)
            for c, s in enumerate(states):
                box = QComboBox()
                box.addItems(list(s.items))
                box.setCurrentText(s.marker_item)
                box.setEnabled(bool(s.items) and spec.identification == "marker")
                box.setAccessibleName(f"Marker item of {s.name}")
                box.setToolTip("The marker item's loading is fixed at 1." if
                               spec.identification == "marker" else
                               "The scale is set by innovation variance 1 (Dynamics page).")
                box.currentTextChanged.connect(
                    lambda text, name=s.name: self._marker_chosen(name, text))
                self.grid.setCellWidget(row, c, box)
                self._markers[s.name] = box

    def _show_messages(self) -> None:
        if self._session.diary is None:
            self.messages.setText("Import a diary first (File ▸ Import data…).")
            return
        notes, problem = self._session.validation()
        lines = []
        if problem:
            lines.append(f"<span style='color:{style.WARNING}'><b>To fix before estimating:</b> "
                         f"{_html(problem)}</span>")
        lines += [f"<span style='color:{style.NOTE}'>Note: {_html(n)}</span>" for n in notes]
        if not lines:
            lines.append("The states are ready to estimate.")
        self.messages.setText("<br>".join(lines))

    # ----- public actions (also used by the buttons and drops) ------------------------
    def marker_box(self, state: str) -> QComboBox:
        """The marker-item chooser of a state (under the grid)."""
        return self._markers[state]

    def selected_state(self) -> str | None:
        item = self.tree.currentItem()
        if item is None:
            return None
        node = item if item.parent() is None else item.parent()
        return node.data(0, NAME_ROLE)

    def add_state(self, name: str | None = None) -> str:
        spec = self._session.spec
        name = name or new_state_name(spec)
        self._session.edit_spec(add_state(spec, name), f"Add state {name}")
        return name

    def rename_state(self, old: str, new: str) -> bool:
        new = new.strip()
        spec = self._session.spec
        if not new or new == old or new in spec.state_names:
            self.refresh()
            if new and new != old:
                self.messages.setText(f"<span style='color:{style.WARNING}'>There is already a "
                                      f"state named '{_html(new)}'.</span>")
            return False
        self._session.edit_spec(rename_state(spec, old, new), f"Rename {old} to {new}")
        return True

    def delete_state(self, name: str) -> None:
        self._session.edit_spec(delete_state(self._session.spec, name), f"Remove state {name}")

    def set_assigned(self, state: str, item: str, on: bool) -> None:
        verb = "Assign" if on else "Unassign"
        self._session.edit_spec(assign_item(self._session.spec, state, item, on),
                                f"{verb} {item} {'to' if on else 'from'} {state}")

    def drop_items(self, state: str, items: list[str], sources: list[str] | None = None) -> None:
        """Items dropped on `state` (moved from `sources` when dragged from other states)."""
        spec = self._session.spec
        for i, item in enumerate(items):
            source = sources[i] if sources else None
            if source and source != state:
                spec = move_item(spec, item, source, state)
            elif not source:
                spec = assign_item(spec, state, item, True)
        self._session.edit_spec(spec, f"Drop {', '.join(items)} on {state}")

    # ----- signal handlers -----------------------------------------------------------
    def _add_clicked(self) -> None:
        name = self.add_state()
        self.refresh()
        for i in range(self.tree.topLevelItemCount()):
            node = self.tree.topLevelItem(i)
            if node.data(0, NAME_ROLE) == name:
                self.tree.setCurrentItem(node)
                self.tree.editItem(node, 0)

    def _rename_clicked(self) -> None:
        item = self.tree.currentItem()
        if item is not None and item.parent() is None:
            self.tree.editItem(item, 0)

    def _delete_clicked(self) -> None:
        item = self.tree.currentItem()
        if item is None:
            return
        if item.parent() is None:
            self.delete_state(item.data(0, NAME_ROLE))
        else:
            self.set_assigned(item.parent().data(0, NAME_ROLE), item.data(0, NAME_ROLE), False)

    def _tree_edited(self, item: QTreeWidgetItem, column: int) -> None:
        if self._syncing or item.parent() is not None:
            return
        self.rename_state(item.data(0, NAME_ROLE), item.text(0))

    def _grid_toggled(self, cell: QTableWidgetItem) -> None:
        if self._syncing or cell.data(NAME_ROLE) is None:
            return
        state, item = cell.data(NAME_ROLE)
        self.set_assigned(state, item, cell.checkState() == Qt.CheckState.Checked)

    def _marker_chosen(self, state: str, item: str) -> None:
        if self._syncing or not item:
            return
        self._session.edit_spec(set_marker(self._session.spec, state, item),
                                f"Marker of {state}: {item}")


def _html(text: str) -> str:
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
