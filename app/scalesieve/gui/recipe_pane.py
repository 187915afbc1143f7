"""Recipe pane: the ordered edits, each with an enable box and its settings.

Settings are edited in place (double-click or F2 on a value); every change
goes to the model as one undoable step.  Edits are reordered with the arrow
buttons and removed with the cross (or the Delete key).
"""

from __future__ import annotations

import textwrap
from dataclasses import replace

from PySide6.QtCore import Qt, QTimer, Signal
from PySide6.QtWidgets import (QAbstractItemView, QComboBox, QHBoxLayout, QHeaderView, QLabel,
                               QPushButton, QStyledItemDelegate, QToolButton, QTreeWidget,
                               QTreeWidgetItem, QVBoxLayout, QWidget)

from scalesieve.core.thresholds import NOISE, RULES, SHAPES
from scalesieve.errors import ScalesieveError
from scalesieve.views.band_labels import db_to_gain, levels_text
from scalesieve.views.edit_words import db_text, edit_text
from scalesieve.gui.resource_files import icon
from scalesieve.recipe import parse_levels
from scalesieve.gui.event_guard import reported

#: the settings each kind of edit shows, in order
FIELDS = {
    "gain": ("levels", "gain", "channels"),
    "threshold": ("levels", "rule", "shape", "noise", "scale", "value", "channels"),
    "region": ("levels", "start_s", "stop_s", "gain", "channels"),
}
CHOICES = {"rule": tuple(RULES), "shape": tuple(SHAPES), "noise": tuple(NOISE)}
HELP = {
    "levels": "1,2 or 1-3 or details or all; a is the approximation",
    "gain": "in dB (−6, +3); −inf mutes",
    "rule": "universal (VisuShrink), sure (SureShrink), bayes (BayesShrink), minimax, manual",
    "shape": "hard keeps or kills; soft shrinks by λ; garrote in between",
    "noise": "finest: σ from the finest band (white noise); level: σ per band (coloured noise)",
    "scale": "multiplies λ",
    "value": "λ in signal units (manual rule)",
    "start_s": "seconds",
    "stop_s": "seconds",
    "channels": "all, or channel numbers from 0 (0,2)",
}
FIELD_ROLE = Qt.ItemDataRole.UserRole + 1
INDEX_ROLE = Qt.ItemDataRole.UserRole + 2


def field_text(edit, name: str) -> str:
    v = getattr(edit, name)
    if name == "levels":
        return levels_text(v)
    if name == "channels":
        return "all" if v is None else ",".join(str(k) for k in v)
    if name == "value":
        return "" if v is None else f"{v:g}"
    if name == "gain":
        return db_text(v)
    if isinstance(v, float):
        return f"{v:g}"
    return str(v)


def parse_field(edit, name: str, text: str):
    """The edit with one setting changed from text; ValueError names what is wrong."""
    t = text.strip()
    if name == "levels":
        return replace(edit, levels=parse_levels(t))
    if name == "channels":
        if t.lower() in ("", "all"):
            return replace(edit, channels=None)
        try:
            chans = tuple(int(p) for p in t.replace(" ", "").split(",") if p)
        except ValueError:
            raise ValueError(f"channels {t!r}: give 'all' or numbers like 0,2") from None
        if any(c < 0 for c in chans):
            raise ValueError("channels are numbered from 0")
        return replace(edit, channels=chans)
    if name in CHOICES:
        if t not in CHOICES[name]:
            raise ValueError(f"{name} {t!r} is not one of {', '.join(CHOICES[name])}")
        return replace(edit, **{name: t})
    if name == "gain":
        return replace(edit, gain=parse_db(t))
    try:
        v = float(t)
    except ValueError:
        raise ValueError(f"{name}: {t!r} is not a number") from None
    if v != v or v in (float("inf"), float("-inf")):
        raise ValueError(f"{name} must be a finite number")
    if name in ("gain", "scale", "value") and v < 0:
        raise ValueError(f"{name} must be 0 or more")
    new = replace(edit, **{name: v})
    if name in ("start_s", "stop_s") and new.start_s >= new.stop_s:
        raise ValueError(f"start_s {new.start_s:g} must be before stop_s {new.stop_s:g}")
    return new


def parse_db(text: str) -> float:
    """A gain typed in dB (``-6``, ``−6 dB``, ``-inf`` or ``mute``) as a factor."""
    t = text.strip().replace("−", "-").lower()
    if t.endswith("db"):
        t = t[:-2].strip()
    if t in ("mute", "-inf", "-∞", "-infinity"):
        return 0.0
    try:
        db = float(t)
    except ValueError:
        raise ValueError(f"gain: {text!r} is not a number of dB (or -inf to mute)") from None
    if db != db or db == float("inf"):
        raise ValueError("gain must be a finite number of dB, or -inf to mute")
    return 0.0 if db == float("-inf") else db_to_gain(db)


class _Delegate(QStyledItemDelegate):
    """Choice lists for rule, shape and noise; plain text for the rest."""

    @reported
    def createEditor(self, parent, option, index):
        name = index.siblingAtColumn(0).data(FIELD_ROLE)
        if name in CHOICES:
            box = QComboBox(parent)
            box.addItems(CHOICES[name])
            return box
        return super().createEditor(parent, option, index)

    @reported
    def setEditorData(self, editor, index):
        if isinstance(editor, QComboBox):
            editor.setCurrentText(index.data())
            return
        super().setEditorData(editor, index)
        name = index.siblingAtColumn(0).data(FIELD_ROLE)
        if name == "gain" and hasattr(editor, "setText"):
            editor.setText(str(index.data()).replace(" dB", ""))

    @reported
    def setModelData(self, editor, model, index):
        if isinstance(editor, QComboBox):
            model.setData(index, editor.currentText())
            return
        super().setModelData(editor, model, index)


class RecipePane(QWidget):
    """Lists the model's edits; sends changes back through the adapter."""

    editSelected = Signal(int)
    openRequested = Signal()
    saveRequested = Signal()
    applyRequested = Signal()
    problem = Signal(str)

    def __init__(self, adapter, parent=None):
        super().__init__(parent)
        self.adapter = adapter
        lay = QVBoxLayout(self)
        lay.setContentsMargins(6, 6, 6, 6)
        lay.setSpacing(4)
        self.tree = QTreeWidget()
        self.tree.setColumnCount(2)
        self.tree.setHeaderLabels(["edit", "setting"])
        self.tree.header().setSectionResizeMode(0, QHeaderView.ResizeMode.ResizeToContents)
        self.tree.header().setStretchLastSection(True)
        self.tree.setAlternatingRowColors(True)
        self.tree.setItemDelegateForColumn(1, _Delegate(self.tree))
        self.tree.setEditTriggers(QAbstractItemView.EditTrigger.DoubleClicked
                                  | QAbstractItemView.EditTrigger.EditKeyPressed
                                  | QAbstractItemView.EditTrigger.SelectedClicked)
        self.tree.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        # Entries wrap at the pane's width: nothing is cut off.
        self.tree.setWordWrap(True)
        self.tree.setUniformRowHeights(False)
        self.tree.setTextElideMode(Qt.TextElideMode.ElideNone)
        self.tree.header().setSectionResizeMode(1, QHeaderView.ResizeMode.Stretch)
        self.empty = QLabel("No edits yet. Set a band's gain or mute it in its row header on the "
                            "Scale map, threshold the selected rows, or drag a region on the map.")
        self.empty.setWordWrap(True)
        self.empty.setObjectName("hint")
        lay.addWidget(self.empty)
        lay.addWidget(self.tree, 1)
        buttons = QHBoxLayout()
        self.up = self._tool("up", "move the selected edit earlier")
        self.down = self._tool("down", "move the selected edit later")
        self.remove = self._tool("remove", "remove the selected edit (Delete)")
        for b in (self.up, self.down, self.remove):
            buttons.addWidget(b)
        buttons.addStretch(1)
        self.open_button = QPushButton("Open…")
        self.open_button.setToolTip("replace the edits (and transform) by a recipe file")
        self.apply_button = QPushButton("Apply…")
        self.apply_button.setToolTip("add a recipe file's edits after the current ones")
        self.save_button = QPushButton("Save…")
        self.save_button.setToolTip("write the transform and edits as a recipe file")
        for b in (self.open_button, self.apply_button, self.save_button):
            buttons.addWidget(b)
        lay.addLayout(buttons)
        self.up.clicked.connect(lambda: self._move(-1))
        self.down.clicked.connect(lambda: self._move(+1))
        self.remove.clicked.connect(self.remove_selected)
        self.open_button.clicked.connect(self.openRequested)
        self.apply_button.clicked.connect(self.applyRequested)
        self.save_button.clicked.connect(self.saveRequested)
        self.tree.itemChanged.connect(self._item_changed)
        self.tree.currentItemChanged.connect(self._current_changed)
        adapter.recipeChanged.connect(lambda change: self.rebuild())
        adapter.modelReplaced.connect(self.rebuild)
        adapter.busyChanged.connect(lambda busy: self.setEnabled(not busy))
        self._building = False
        self._in_item = False
        self._later = QTimer(self)
        self._later.setSingleShot(True)
        self._later.setInterval(0)
        self._later.timeout.connect(self.rebuild)
        self.rebuild()

    def _tool(self, name: str, tip: str) -> QToolButton:
        b = QToolButton()
        b.setIcon(icon(name))
        b.setText({"up": "↑", "down": "↓", "remove": "✕"}[name])
        b.setToolTip(tip)
        return b

    # ------------------------------------------------------------- showing

    def selected_index(self) -> int:
        item = self.tree.currentItem()
        if item is None:
            return -1
        while item.parent() is not None:
            item = item.parent()
        return int(item.data(0, INDEX_ROLE))

    def rebuild(self) -> None:
        """Show the model's edits (keeps the selection and what was expanded)."""
        if self._in_item:
            # Called back from the item being edited: clearing the tree now would
            # delete that item under Qt's feet, so the list is redrawn right after.
            self._later.start()
            return
        self._later.stop()
        keep = self.selected_index()
        open_rows = {int(self.tree.topLevelItem(i).data(0, INDEX_ROLE))
                     for i in range(self.tree.topLevelItemCount())
                     if self.tree.topLevelItem(i).isExpanded()}
        self._building = True
        try:
            self.tree.clear()
            edits = self.adapter.edits
            for i, e in enumerate(edits):
                text = edit_text(e, self.adapter.model)
                top = QTreeWidgetItem([f"{i + 1}", self._wrapped(text)])
                top.setData(0, INDEX_ROLE, i)
                top.setFlags(top.flags() | Qt.ItemFlag.ItemIsUserCheckable)
                top.setCheckState(0, Qt.CheckState.Checked if e.enabled
                                  else Qt.CheckState.Unchecked)
                top.setToolTip(0, "tick: the edit is applied; untick: kept but not applied")
                top.setToolTip(1, text)
                for name in FIELDS[e.op]:
                    if name == "value" and e.rule != "manual":
                        continue
                    child = QTreeWidgetItem([name, field_text(e, name)])
                    child.setData(0, FIELD_ROLE, name)
                    child.setData(0, INDEX_ROLE, i)
                    child.setFlags(child.flags() | Qt.ItemFlag.ItemIsEditable)
                    child.setToolTip(1, HELP.get(name, ""))
                    top.addChild(child)
                self.tree.addTopLevelItem(top)
                top.setExpanded(i in open_rows)
            self.empty.setVisible(not edits)
            if 0 <= keep < len(edits):
                self.tree.setCurrentItem(self.tree.topLevelItem(keep))
        finally:
            self._building = False
        self._enable()

    def _wrapped(self, text: str) -> str:
        """The entry broken into lines that fit the list's width (nothing cut off)."""
        width = max(120, self.tree.viewport().width() - 60)
        # a little under the average: wide letters must not push a line past the edge
        chars = max(16, int(width / (1.3 * max(1, self.tree.fontMetrics().averageCharWidth()))))
        return "\n".join(textwrap.wrap(text, chars)) or text

    @reported(once=True)
    def resizeEvent(self, ev):
        super().resizeEvent(ev)
        if self.adapter.edits:
            self._later.start()

    def _enable(self) -> None:
        i = self.selected_index()
        n = len(self.adapter.edits)
        self.up.setEnabled(i > 0)
        self.down.setEnabled(0 <= i < n - 1)
        self.remove.setEnabled(i >= 0)
        self.save_button.setEnabled(self.adapter.model is not None)

    def select(self, index: int) -> None:
        """Select an edit (from the Scale map); -1 clears the selection."""
        if index == self.selected_index():
            return
        self._building = True
        try:
            if 0 <= index < self.tree.topLevelItemCount():
                item = self.tree.topLevelItem(index)
                self.tree.setCurrentItem(item)
                item.setExpanded(True)
            else:
                self.tree.setCurrentItem(None)
                self.tree.clearSelection()
        finally:
            self._building = False
        self._enable()

    # ------------------------------------------------------------- editing

    def _current_changed(self, *_):
        self._enable()
        if not self._building:
            self.editSelected.emit(self.selected_index())

    def _item_changed(self, item: QTreeWidgetItem, column: int) -> None:
        if self._building:
            return
        self._in_item = True
        try:
            self._apply_item(item)
        finally:
            self._in_item = False

    def _apply_item(self, item: QTreeWidgetItem) -> None:
        i = int(item.data(0, INDEX_ROLE))
        edits = self.adapter.edits
        if not 0 <= i < len(edits):
            return
        e = edits[i]
        if item.parent() is None:
            on = item.checkState(0) == Qt.CheckState.Checked
            if on != e.enabled:
                self.adapter.replace_edit(i, replace(e, enabled=on))
            return
        name = item.data(0, FIELD_ROLE)
        try:
            new = parse_field(e, name, item.text(1))
        except (ValueError, ScalesieveError) as exc:
            self.problem.emit(f"edit {i + 1} ({e.op}): {exc}")
            self.rebuild()
            return
        if new != e:
            if not self.adapter.replace_edit(i, new):
                self.rebuild()
        else:
            self.rebuild()

    def _move(self, step: int) -> None:
        i = self.selected_index()
        j = i + step
        if i < 0 or not 0 <= j < len(self.adapter.edits):
            return
        if self.adapter.move_edit(i, j):
            self.tree.setCurrentItem(self.tree.topLevelItem(j))

    def remove_selected(self) -> None:
        i = self.selected_index()
        if i >= 0:
            self.adapter.remove_edit(i)

    @reported
    def keyPressEvent(self, ev):
        if ev.key() == Qt.Key.Key_Delete and self.selected_index() >= 0 \
                and self.tree.state() != QAbstractItemView.State.EditingState:
            self.remove_selected()
            ev.accept()
            return
        super().keyPressEvent(ev)
