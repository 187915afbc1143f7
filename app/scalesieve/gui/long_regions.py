"""Region edits on the long recording's Scale map: drawn, selected, moved, changed, removed.

As on the in-memory Scale map (``map_regions``): dragging a rectangle over
times and bands makes a region edit (snapped to whole coefficient tiles of
its coarsest band, ``views.long_picture.snap_to_tiles``), at the gain the
region line's field holds (−∞ dB, a mute, until changed); each region is
drawn as an outline that a click selects, that can then be moved and
resized, whose gain the field sets, and that Delete (or the line's Remove
button, or its context menu) removes.  Region edits from an opened recipe are
outlined too, dotted, and stay as the recipe has them.  The window's edits
are the recipe's, the band gains, the threshold, then these regions
(``LongWindow.edits``); every change asks for the view again.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
from PySide6.QtCore import QObject, Qt, QTimer, Signal
from PySide6.QtGui import QAction
from PySide6.QtWidgets import (QDoubleSpinBox, QHBoxLayout, QLabel, QMenu, QPushButton,
                               QWidget)

from scalesieve.gui.elided_label import ElidedLabel
from scalesieve.gui.map_regions import RegionOutline, contiguous_runs
from scalesieve.gui.row_headers import GAIN_MAX_DB, GAIN_MIN_DB, MUTE_TEXT
from scalesieve.recipe import Edit
from scalesieve.views.band_labels import db_to_gain, gain_to_db
from scalesieve.views.long_picture import rows_of, snap_to_tiles
from scalesieve.gui.event_guard import reported

#: a drag narrower than this many pixels is a click, not a region
LEAST_PX = 3


class RegionLine(QWidget):
    """The Scale map's line for region edits: how to make one, the selected one's gain."""

    def __init__(self, parent=None):
        super().__init__(parent)
        row = QHBoxLayout(self)
        row.setContentsMargins(0, 0, 0, 0)
        self.label = QLabel("Region edits")
        self.count = ElidedLabel("none yet: drag over the map")
        self.count.setObjectName("hint")
        self.gain = QDoubleSpinBox()
        self.gain.setRange(GAIN_MIN_DB, GAIN_MAX_DB)
        self.gain.setDecimals(1)
        self.gain.setSuffix(" dB")
        self.gain.setSpecialValueText(MUTE_TEXT)
        self.gain.setKeyboardTracking(False)
        self.gain.setValue(GAIN_MIN_DB)
        self.gain.setFixedWidth(96)
        self.gain.setToolTip("gain of the selected region (and of the next one drawn); "
                             "−∞ mutes it")
        self.remove = QPushButton("Remove")
        self.remove.setToolTip("remove the selected region (Delete)")
        self.remove.setEnabled(False)
        row.addWidget(self.label)
        row.addWidget(self.count, 1)
        row.addWidget(QLabel("gain"))
        row.addWidget(self.gain)
        row.addWidget(self.remove)


class LongRegions(QObject):
    """The window's own region edits and their outlines on ``scale_map`` (a ``LongScaleMap``)."""

    changed = Signal()

    def __init__(self, scale_map, parent=None):
        super().__init__(parent)
        self.map = scale_map
        self.line = scale_map.region_line
        self.edits: list[Edit] = []
        self.fixed: tuple = ()           # region edits of the recipe as opened (not editable)
        self.selected = -1
        self.lr = None
        self._outlines: list = []
        self._building = False
        scale_map.view.rectangleDrawn.connect(self._rectangle_drawn)
        scale_map.view.clicked.connect(self._clicked)
        self.line.gain.valueChanged.connect(self._gain_changed)
        self.line.remove.clicked.connect(self.remove_selected)
        scale_map.plot.installEventFilter(self)

    # ------------------------------------------------------------------ state

    def set_recording(self, lr, fixed=()) -> None:
        self.lr = lr
        self.fixed = tuple(e for e in fixed if e.op == "region")
        self.edits, self.selected = [], -1
        self.redraw()

    def set_edits(self, edits) -> None:
        """Take these region edits as the window's own (a restored session)."""
        self.edits = [e for e in edits if e.op == "region"]
        self.selected = -1
        self.redraw()
        self.changed.emit()

    def add(self, edit: Edit) -> None:
        self.edits.append(edit)
        self.selected = len(self.edits) - 1
        self.redraw()
        self.changed.emit()

    def replace_edit(self, index: int, edit: Edit) -> None:
        if 0 <= index < len(self.edits) and self.edits[index] != edit:
            self.edits[index] = edit
            # not under the outline's own event: redrawn once its handler has returned
            QTimer.singleShot(0, self.redraw)
            self.changed.emit()

    def remove_selected(self) -> None:
        if 0 <= self.selected < len(self.edits):
            del self.edits[self.selected]
            self.selected = -1
            self.redraw()
            self.changed.emit()

    def select(self, index: int) -> None:
        self.selected = index if 0 <= index < len(self.edits) else -1
        self._building = True
        try:
            for roi in self._outlines:
                roi.set_selected(roi.index == self.selected and roi.index >= 0)
        finally:
            self._building = False
        self._show_selected()

    # ------------------------------------------------------------------ drawing

    def _rows(self, edit) -> list[int]:
        level = self.lr.spec.level
        keys = rows_of(level)
        try:
            mine = edit.band_keys(level)
        except ValueError:
            return []
        return [keys.index(k) for k in mine if k in keys]

    def redraw(self) -> None:
        plot = self.map.plot
        for roi in self._outlines:
            plot.removeItem(roi)
        self._outlines = []
        if self.lr is not None:
            shown = [(-1, e) for e in self.fixed] + list(enumerate(self.edits))
            for index, e in shown:
                for row0, count in contiguous_runs(self._rows(e)):
                    roi = RegionOutline(index, e.start_s, e.stop_s, row0, count,
                                        e.enabled and index >= 0)
                    plot.addItem(roi)
                    self._outlines.append(roi)
                    if index >= 0:
                        roi.sigClicked.connect(self._outline_clicked)
                        roi.sigRegionChangeFinished.connect(self._outline_moved)
                        if index == self.selected:
                            # handles only on an outline in the scene (before it, a crash)
                            self._building = True
                            try:
                                roi.set_selected(True)
                            finally:
                                self._building = False
                    else:
                        roi.setToolTip(f"from the recipe: {_words(e, self.lr.spec.level)}")
                        roi.setAcceptedMouseButtons(Qt.MouseButton.NoButton)
        self._show_selected()

    def outlines(self) -> list:
        return list(self._outlines)

    def _show_selected(self) -> None:
        n = len(self.edits)
        fixed = (f" · {len(self.fixed)} more in the recipe as opened (dotted)"
                 if self.fixed else "")
        if n == 0:
            self.line.count.setText(f"none yet: drag over the map{fixed}")
        else:
            which = (f" · selected: {_words(self.edits[self.selected], self.lr.spec.level)}"
                     if self.selected >= 0 else " · click one to select it")
            self.line.count.setText(f"{n} region edit{'s' if n != 1 else ''}{which}{fixed}")
        self.line.remove.setEnabled(self.selected >= 0)
        if self.selected >= 0:
            g = self.edits[self.selected].gain
            self.line.gain.blockSignals(True)
            self.line.gain.setValue(GAIN_MIN_DB if g <= 0 else gain_to_db(g))
            self.line.gain.blockSignals(False)

    # ------------------------------------------------------------------ mouse and keys

    def _rectangle_drawn(self, t0: float, t1: float, y0: float, y1: float) -> None:
        lr = self.lr
        if lr is None:
            return
        vb = self.map.view
        (v0, v1), _ = vb.viewRange()
        if (t1 - t0) / max(v1 - v0, 1e-12) * vb.width() < LEAST_PX:
            return
        keys = rows_of(lr.spec.level)
        dur = lr.n / lr.rate
        t0, t1 = max(0.0, t0), min(dur, t1)
        if t1 <= t0:
            return
        r0 = int(np.clip(math.floor(y0), 0, len(keys) - 1))
        r1 = int(np.clip(math.floor(y1), r0, len(keys) - 1))
        levels = tuple(keys[r0:r1 + 1])
        t0, t1 = snap_to_tiles(lr.spec, lr.n, lr.rate, levels, t0, t1)
        self.add(Edit("region", levels=levels, start_s=round(t0, 9), stop_s=round(t1, 9),
                      gain=self._gain()))
        self.line.gain.setFocus()
        self.line.gain.selectAll()

    def _gain(self) -> float:
        db = self.line.gain.value()
        return 0.0 if db <= GAIN_MIN_DB else float(db_to_gain(db))

    def _gain_changed(self, _db: float) -> None:
        if 0 <= self.selected < len(self.edits):
            e = self.edits[self.selected]
            g = self._gain()
            if g != e.gain:
                self.edits[self.selected] = replace(e, gain=g)
                self._show_selected()
                self.changed.emit()

    def _clicked(self, t: float, y: float, button) -> None:
        if button == Qt.MouseButton.LeftButton:
            self.select(-1)

    def _outline_clicked(self, roi, ev) -> None:
        ev.accept()
        self.select(roi.index)
        if ev.button() == Qt.MouseButton.RightButton:
            self._menu(roi.index, ev.screenPos())

    def _outline_moved(self, roi) -> None:
        lr = self.lr
        if self._building or lr is None or not (0 <= roi.index < len(self.edits)):
            return
        e = self.edits[roi.index]
        pos, size = roi.pos(), roi.size()
        dur = lr.n / lr.rate
        start = float(np.clip(pos.x(), 0.0, dur))
        stop = float(np.clip(pos.x() + size.x(), 0.0, dur))
        if stop <= start:
            QTimer.singleShot(0, self.redraw)
            return
        keys = rows_of(lr.spec.level)
        levels = e.levels
        runs = contiguous_runs(self._rows(e))
        if len(runs) == 1:
            r0 = int(np.clip(round(pos.y()), 0, len(keys) - 1))
            r1 = int(np.clip(round(pos.y() + size.y()), r0 + 1, len(keys)))
            levels = tuple(keys[r0:r1])
        start, stop = snap_to_tiles(lr.spec, lr.n, lr.rate, levels, start, stop)
        self.replace_edit(roi.index, replace(e, levels=levels, start_s=round(start, 9),
                                             stop_s=round(stop, 9)))

    def _menu(self, index: int, screen_pos) -> None:
        e = self.edits[index]
        menu = QMenu(self.map)
        mute = QAction("Mute (−∞ dB)", menu)
        mute.triggered.connect(lambda: self.replace_edit(index, replace(e, gain=0.0)))
        toggle = QAction("Disable" if e.enabled else "Enable", menu)
        toggle.triggered.connect(lambda: self.replace_edit(index, replace(e, enabled=not
                                                                         e.enabled)))
        remove = QAction("Remove", menu)
        remove.triggered.connect(self.remove_selected)
        for a in (mute, toggle, remove):
            menu.addAction(a)
        menu.popup(screen_pos.toPoint() if hasattr(screen_pos, "toPoint") else screen_pos)

    @reported(fallback=False, once=True)
    def eventFilter(self, obj, ev):  # noqa: N802 - Qt API
        from PySide6.QtCore import QEvent

        if ev.type() == QEvent.Type.KeyPress and ev.key() in (Qt.Key.Key_Delete,
                                                              Qt.Key.Key_Backspace) \
                and self.selected >= 0:
            self.remove_selected()
            return True
        return False


def _words(e: Edit, level: int) -> str:
    """``d1, d2 5.2–5.4 s at −∞ dB``."""
    from scalesieve.core.transforms import band_name
    from scalesieve.views.edit_words import db_text

    try:
        bands = ", ".join(band_name(k, level) for k in e.band_keys(level))
    except ValueError:
        bands = str(e.levels)
    return f"{bands} {e.start_s:.6g}–{e.stop_s:.6g} s at {db_text(e.gain)}"
