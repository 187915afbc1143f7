"""Region edits on the Scale map: outlines drawn, selected, moved, resized, changed, removed.

A part of ``ScaleMapPane`` (``scale_map.py``): dragging a rectangle over
times and levels makes a region edit; each region edit is drawn as an
outline that can be selected, moved and resized (snapped to the
coefficients' tiles), changed through its context menu and removed with the
Delete key.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QRectF, Qt, QTimer, Signal
from PySide6.QtGui import QAction, QBrush, QColor
from PySide6.QtWidgets import QGraphicsRectItem, QMenu

from scalesieve.gui.pane_frame import TimeViewBox
from scalesieve.gui.resource_files import colour
from scalesieve.gui.row_headers import GAIN_MIN_DB
from scalesieve.recipe import Edit
from scalesieve.views.band_labels import db_to_gain, gain_to_db
from scalesieve.gui.event_guard import reported


class MapViewBox(TimeViewBox):
    """Left-drag draws a rectangle; Shift-drag or middle-drag pans; wheel zooms time."""

    rectangleDrawn = Signal(float, float, float, float)   # t0, t1, y0, y1
    clicked = Signal(float, float, object)                 # t, y, button
    hovered = Signal(float, float)

    def __init__(self):
        super().__init__()
        self.drawing = True
        self._band = QGraphicsRectItem()
        self._band.setPen(pg.mkPen(colour("traces", "region_selected"), width=1.5,
                                   style=Qt.PenStyle.DashLine, cosmetic=True))
        self._band.setBrush(QBrush(QColor(255, 176, 0, 40)))
        self._band.setZValue(50)
        self._band.hide()
        self.addItem(self._band, ignoreBounds=True)

    @reported(once=True)
    def mouseDragEvent(self, ev, axis=None):
        shift = bool(ev.modifiers() & Qt.KeyboardModifier.ShiftModifier)
        if ev.button() != Qt.MouseButton.LeftButton or shift or not self.drawing:
            super().mouseDragEvent(ev, axis)
            return
        ev.accept()
        p0 = self.mapToView(ev.buttonDownPos())
        p1 = self.mapToView(ev.pos())
        rect = QRectF(p0, p1).normalized()
        if ev.isFinish():
            self._band.hide()
            self.rectangleDrawn.emit(rect.left(), rect.right(), rect.top(), rect.bottom())
        else:
            self._band.setRect(rect)
            self._band.show()

    @reported
    def mouseClickEvent(self, ev):
        p = self.mapToView(ev.pos())
        ev.accept()
        self.clicked.emit(p.x(), p.y(), ev.button())

    @reported(once=True)
    def hoverEvent(self, ev):
        if ev.isExit():
            self.hovered.emit(math.nan, math.nan)
            return
        p = self.mapToView(ev.pos())
        self.hovered.emit(p.x(), p.y())


class RegionOutline(pg.ROI):
    """One contiguous run of rows of a region edit, drawn as an outline."""

    def __init__(self, index: int, t0: float, t1: float, row0: int, rows: int, enabled: bool):
        pen = pg.mkPen(colour("traces", "region"), width=1.6, cosmetic=True,
                       style=Qt.PenStyle.SolidLine if enabled else Qt.PenStyle.DotLine)
        super().__init__((t0, row0), (t1 - t0, rows), pen=pen, movable=False,
                         rotatable=False, resizable=False, removable=False)
        self.index = index
        self.setAcceptedMouseButtons(Qt.MouseButton.LeftButton | Qt.MouseButton.RightButton)
        self.setZValue(20)
        self.hoverPen = pg.mkPen(colour("traces", "region_selected"), width=2, cosmetic=True)
        self._selected = False

    def set_selected(self, on: bool) -> None:
        self._selected = on
        width = 2.6 if on else 1.6
        col = colour("traces", "region_selected") if on else colour("traces", "region")
        self.setPen(pg.mkPen(col, width=width, cosmetic=True))
        self.translatable = on
        if on and not self.getHandles():
            self.addScaleHandle([1, 0.5], [0, 0.5])
            self.addScaleHandle([0, 0.5], [1, 0.5])
        elif not on:
            for h in list(self.getHandles()):
                self.removeHandle(h)


def contiguous_runs(rows: list[int]) -> list[tuple[int, int]]:
    """[(first row, count)] of consecutive rows."""
    runs: list[tuple[int, int]] = []
    for r in sorted(set(rows)):
        if runs and r == runs[-1][0] + runs[-1][1]:
            runs[-1] = (runs[-1][0], runs[-1][1] + 1)
        else:
            runs.append((r, 1))
    return runs


class MapRegions:
    """The region edits of the Scale map (a part of ``ScaleMapPane``)."""

    def _row_of(self, key) -> int:
        return self.keys.index(key)

    def _key_rows(self, edit, level: int) -> list[int]:
        try:
            keys = edit.band_keys(level)
        except ValueError:
            return []
        return [self._row_of(k) for k in keys if k in self.keys]

    def _draw_outlines(self) -> None:
        self._building_outlines = True
        try:
            self._make_outlines()
        finally:
            self._building_outlines = False

    def _make_outlines(self) -> None:
        for roi in self._outlines:
            self.plot.removeItem(roi)
        self._outlines = []
        m = self.adapter.model
        if m is None:
            return
        for i, e in enumerate(m.edits):
            if e.op != "region" or (e.channels is not None and self.channel not in e.channels):
                continue
            for row0, count in contiguous_runs(self._key_rows(e, m.spec)):
                roi = RegionOutline(i, e.start_s, e.stop_s, row0, count, e.enabled)
                if i == self.selected:
                    roi.set_selected(True)
                roi.sigClicked.connect(self._outline_clicked)
                roi.sigRegionChangeFinished.connect(self._outline_moved)
                self.plot.addItem(roi)
                self._outlines.append(roi)

    def outlines(self) -> list[RegionOutline]:
        return list(self._outlines)

    def select_edit(self, index: int) -> None:
        """Select a region edit (from the Recipe pane or a click)."""
        m = self.adapter.model
        if m is None or not (0 <= index < len(m.edits)) or m.edits[index].op != "region":
            index = -1
        if index == self.selected:
            return
        self.selected = index
        self._building_outlines = True
        try:
            for roi in self._outlines:
                roi.set_selected(roi.index == index)
        finally:
            self._building_outlines = False
        self._show_region_gain()
        self.regionSelected.emit(index)

    def _show_region_gain(self) -> None:
        """The gain field shows the selected region's gain (hidden when none is selected)."""
        m = self.adapter.model
        on = (m is not None and 0 <= self.selected < len(m.edits)
              and m.edits[self.selected].op == "region")
        self.region_gain.setVisible(on)
        self.region_gain_label.setVisible(on)
        if on:
            g = m.edits[self.selected].gain
            self.region_gain.blockSignals(True)
            self.region_gain.setValue(GAIN_MIN_DB if g <= 0 else gain_to_db(g))
            self.region_gain.blockSignals(False)

    def _region_gain_changed(self, db: float) -> None:
        m = self.adapter.model
        if m is None or not (0 <= self.selected < len(m.edits)):
            return
        e = m.edits[self.selected]
        if e.op != "region":
            return
        self._region_db = db
        g = 0.0 if db <= GAIN_MIN_DB else db_to_gain(db)
        if g != e.gain:
            self.adapter.replace_edit(self.selected, replace(e, gain=g))

    def snap_to_tiles(self, keys, t0: float, t1: float) -> tuple[float, float]:
        """[t0, t1] widened to whole coefficient tiles of the coarsest band in ``keys``.

        A coefficient's tile is its time position ± half the spacing of its band;
        the finer bands' tiles nest inside the coarsest one's.
        """
        m = self.adapter.model
        first, step = max((self._times[k] for k in keys), key=lambda fs: fs[1])
        count = max(1, m.coefficients(self.channel, max(keys, key=lambda k: self._times[k][1]))
                    .shape[0])
        k0 = int(np.clip(math.floor((t0 - first) / step + 0.5), 0, count - 1))
        k1 = int(np.clip(math.ceil((t1 - first) / step - 0.5), k0, count - 1))
        start = first + (k0 - 0.5) * step
        stop = first + (k1 + 0.5) * step
        dur = m.recording.duration_s
        return max(0.0, start), min(dur, stop) if stop > 0 else dur

    def _outline_clicked(self, roi, ev) -> None:
        ev.accept()
        self.select_edit(roi.index)
        if ev.button() == Qt.MouseButton.RightButton:
            self._region_menu(roi.index, ev.screenPos())

    def _outline_moved(self, roi) -> None:
        m = self.adapter.model
        if self._building_outlines or m is None or not (0 <= roi.index < len(m.edits)):
            return
        e = m.edits[roi.index]
        pos, size = roi.pos(), roi.size()
        dur = m.recording.duration_s
        start = float(np.clip(pos.x(), 0.0, dur))
        stop = float(np.clip(pos.x() + size.x(), 0.0, dur))
        if stop <= start:
            QTimer.singleShot(0, self._draw_outlines)
            return
        runs = contiguous_runs(self._key_rows(e, m.spec))
        levels = e.levels
        if len(runs) == 1:
            r0 = int(np.clip(round(pos.y()), 0, len(self.keys) - 1))
            r1 = int(np.clip(round(pos.y() + size.y()), r0 + 1, len(self.keys)))
            new_keys = self.keys[r0:r1]
            if new_keys != [self.keys[r] for r in range(runs[0][0], runs[0][0] + runs[0][1])]:
                levels = tuple(new_keys)
        try:
            keys = [k for k in replace(e, levels=levels).band_keys(m.level) if k in self._times]
        except ValueError:
            keys = []
        if keys:
            start, stop = self.snap_to_tiles(keys, start, stop)
        new = replace(e, start_s=round(start, 9), stop_s=round(stop, 9), levels=levels)
        if new != e:
            # The outlines are redrawn from the recipe once the change is in, after this
            # handler: the outline being dragged must not be deleted under its own event.
            self._in_outline = True
            try:
                self.adapter.replace_edit(roi.index, new)
            finally:
                self._in_outline = False

    def _region_menu(self, index: int, screen_pos) -> None:
        m = self.adapter.model
        if m is None:
            return
        e = m.edits[index]
        menu = QMenu(self)
        mute = QAction("Mute (−∞ dB)", menu)
        mute.triggered.connect(lambda: self.adapter.replace_edit(index, replace(e, gain=0.0)))
        gain = QAction("Set gain in dB…", menu)
        gain.triggered.connect(lambda: (self.select_edit(index), self.region_gain.setFocus(),
                                        self.region_gain.selectAll()))
        toggle = QAction("Disable" if e.enabled else "Enable", menu)
        toggle.triggered.connect(
            lambda: self.adapter.replace_edit(index, replace(e, enabled=not e.enabled)))
        remove = QAction("Remove", menu)
        remove.triggered.connect(lambda: self.remove_selected())
        for a in (mute, gain, toggle, remove):
            menu.addAction(a)
        menu.popup(screen_pos.toPoint() if hasattr(screen_pos, "toPoint") else screen_pos)

    def remove_selected(self) -> None:
        if self.selected >= 0:
            index, self.selected = self.selected, -1
            self.adapter.remove_edit(index)
            self.regionSelected.emit(-1)

    @reported
    def keyPressEvent(self, ev):
        if ev.key() in (Qt.Key.Key_Delete, Qt.Key.Key_Backspace) and self.selected >= 0:
            self.remove_selected()
            ev.accept()
            return
        super().keyPressEvent(ev)

    def _rectangle_drawn(self, t0: float, t1: float, y0: float, y1: float) -> None:
        m = self.adapter.model
        if m is None or not self.keys:
            return
        px = (t1 - t0) / max(self.axis.t1 - self.axis.t0, 1e-12) * self.view.width()
        if px < 3:
            return
        dur = m.recording.duration_s
        t0, t1 = max(0.0, t0), min(dur, t1)
        r0 = int(np.clip(math.floor(y0), 0, len(self.keys) - 1))
        r1 = int(np.clip(math.floor(y1), r0, len(self.keys) - 1))
        if t1 <= t0:
            return
        levels = tuple(self.keys[r0:r1 + 1])
        t0, t1 = self.snap_to_tiles(levels, t0, t1)
        db = self._region_db
        gain = 0.0 if db <= GAIN_MIN_DB else db_to_gain(db)
        edit = Edit("region", levels=levels, start_s=round(t0, 9), stop_s=round(t1, 9),
                    gain=gain, channels=self.adapter.edit_channels(self.channel))
        if self.adapter.add_edit(edit):
            self.select_edit(len(self.adapter.edits) - 1)
            # the region's one gain field, ready for a value
            self.region_gain.setFocus()
            self.region_gain.selectAll()
        else:
            self.setFocus()
