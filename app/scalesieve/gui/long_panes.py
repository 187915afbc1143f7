"""The long-recording window's panes: band rows, the Scale map, traces and overview.

Thin views: each draws a ``views.long_picture.Picture`` (or the summary's
whole-recording envelope) with pyqtgraph items and sends edits back through
the window; none computes a transform.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QRectF, Signal
from PySide6.QtWidgets import (QCheckBox, QComboBox, QDoubleSpinBox, QGridLayout, QHBoxLayout,
                               QLabel, QPushButton, QWidget)

from scalesieve.gui.map_regions import MapViewBox
from scalesieve.gui.pane_frame import RIGHT_MARGIN, PaneFrame, make_plot
from scalesieve.gui.resource_files import colour, palette
from scalesieve.longview.summary import BASE
from scalesieve.views.band_labels import gain_to_db, hz_range

#: the Scale map's colour range: this many dB below the view's largest magnitude
MAP_FLOOR_DB = -50.0
#: the Scale map's colour map (perceptual; resources/palette.json's default)
MAP_COLOURS = palette()["default_colour_map"]
#: height of one band row (px): row headers and map rows share it
ROW_HEIGHT = 22
#: the map's rows start this far below the plot's top (its layout's top margin)
MAP_TOP = 3
#: the height of the map's time axis under its rows
MAP_AXIS = 30


def trace_xy(times: np.ndarray, lo: np.ndarray, hi: np.ndarray):
    """Each column drawn from its lowest to its highest value (peaks kept)."""
    x = np.repeat(times, 2)
    y = np.empty(2 * lo.shape[0])
    y[0::2], y[1::2] = lo, hi
    return x, y


class BandRows(QWidget):
    """One row per band: its frequencies, name, gain in dB and a mute switch."""

    gain_changed = Signal(object, float)       # band key, linear gain (0: muted)

    def __init__(self, parent=None):
        super().__init__(parent)
        self.grid = QGridLayout(self)
        self.grid.setContentsMargins(0, 0, 0, 0)
        self.grid.setVerticalSpacing(0)
        self.rows: dict = {}

    def set_bands(self, bands: list) -> None:
        """``bands``: ``(key, name, low_hz, high_hz)`` finest first."""
        self.setMinimumHeight(ROW_HEIGHT * len(bands))
        for w in self.findChildren(QWidget):
            w.deleteLater()
        self.rows = {}
        for r, (key, name, lo, hi) in enumerate(bands):
            hz = QLabel(hz_range(lo, hi))
            hz.setObjectName("bandHz")
            label = QLabel(name)
            spin = QDoubleSpinBox()
            spin.setRange(-60.0, 20.0)
            spin.setDecimals(1)
            spin.setSingleStep(1.0)
            spin.setSuffix(" dB")
            spin.setKeyboardTracking(False)
            spin.setToolTip(f"gain of {name} in dB")
            spin.setFixedWidth(84)
            mute = QPushButton("mute")
            mute.setCheckable(True)
            mute.setToolTip(f"mute {name} (−∞ dB)")
            mute.setFixedWidth(56)
            for c, w in enumerate((hz, label, spin, mute)):
                w.setFixedHeight(ROW_HEIGHT)
                self.grid.addWidget(w, r, c)
            spin.valueChanged.connect(lambda _v, k=key: self._typed(k))
            mute.toggled.connect(lambda _v, k=key: self._emit(k))
            self.rows[key] = (spin, mute)
        self.exact: dict = {}

    def gain(self, key) -> float:
        spin, mute = self.rows[key]
        if mute.isChecked():
            return 0.0
        if key in self.exact:          # a recipe's gain, shown to 0.1 dB, applied as it is
            return self.exact[key]
        return float(10 ** (spin.value() / 20.0))

    def set_gain(self, key, gain: float) -> None:
        spin, mute = self.rows[key]
        for w in (spin, mute):
            w.blockSignals(True)
        mute.setChecked(gain <= 0)
        if gain > 0:
            spin.setValue(gain_to_db(gain))
            self.exact[key] = float(gain)
        else:
            self.exact.pop(key, None)
        for w in (spin, mute):
            w.blockSignals(False)

    def _typed(self, key) -> None:
        self.exact.pop(key, None)       # a gain typed or stepped: the field's own value
        self._emit(key)

    def _emit(self, key) -> None:
        self.gain_changed.emit(key, self.gain(key))


class ThresholdLine(QWidget):
    """A threshold on every detail band: rule (or none) and shape."""

    changed = Signal()

    RULES = [("none", None), ("VisuShrink (universal)", "universal"),
             ("BayesShrink", "bayes"), ("minimax", "minimax")]

    def __init__(self, parent=None):
        super().__init__(parent)
        row = QHBoxLayout(self)
        row.setContentsMargins(0, 0, 0, 0)
        row.addWidget(QLabel("Threshold details"))
        self.rule = QComboBox()
        for text, value in self.RULES:
            self.rule.addItem(text, value)
        self.shape = QComboBox()
        for s in ("soft", "hard", "garrote"):
            self.shape.addItem(s, s)
        row.addWidget(self.rule)
        row.addWidget(self.shape)
        row.addStretch(1)
        self.rule.currentIndexChanged.connect(lambda *_: self.changed.emit())
        self.shape.currentIndexChanged.connect(lambda *_: self.changed.emit())


class LongScaleMap(PaneFrame):
    """The Scale map of a long recording: bands as rows, largest edited |c| per column."""

    def __init__(self, parent=None):
        super().__init__("Scale map", parent)
        from scalesieve.gui.long_regions import RegionLine

        # the title and the edit lines above, across the pane; each band's controls beside
        # its own row of the map
        top = QWidget()
        top.setObjectName("gutter")
        line = QHBoxLayout(top)
        line.setContentsMargins(8, 3, 8 + RIGHT_MARGIN, 3)
        line.setSpacing(12)
        self.gutter_layout.removeWidget(self.title)
        line.addWidget(self.title)
        self.threshold = ThresholdLine()
        line.addWidget(self.threshold)
        self.region_line = RegionLine()
        line.addWidget(self.region_line, 1)
        self.footer.insertWidget(0, top)
        self.top = top
        self.gutter_layout.setContentsMargins(8, MAP_TOP, 8, 0)
        self.gutter_layout.setSpacing(0)
        self.rows = BandRows()
        self.gutter_layout.addWidget(self.rows)
        self.legend = QLabel(f"colour: each column's largest |c| as edited (exact, region "
                             f"edges too), in dB below the view's largest (0 to "
                             f"{MAP_FLOOR_DB:g} dB, {MAP_COLOURS})")
        self.legend.setObjectName("hint")
        self.legend.setWordWrap(True)
        self.gutter_layout.addWidget(self.legend)
        self.gutter_layout.addStretch(1)
        # left-drag draws a region edit; shift-drag pans; the wheel zooms (as in memory)
        self.view = MapViewBox()
        self.view.invertY(True)
        self.plot = make_plot(self.view)
        self.plot.setToolTip("drag: a region edit (snapped to whole coefficient tiles) · "
                             "shift-drag: pan · wheel: zoom · Del: remove the selected region")
        self.image = pg.ImageItem()
        self.image.setColorMap(pg.colormap.get(MAP_COLOURS))
        self.plot.addItem(self.image)
        self.content.addWidget(self.plot)
        self.content.addStretch(1)          # the rows stay level with their controls
        self.plot.getPlotItem().getAxis("left").setLabel("band")
        self.plot.getPlotItem().getAxis("left").enableAutoSIPrefix(False)
        self.names: list = []
        self.waiting = pg.TextItem("", color=colour("plot", "foreground"), anchor=(0.5, 0.5))
        self.plot.addItem(self.waiting)

    def height_needed(self) -> int:
        """The edit lines, the rows with their controls and the time axis (set_rows first)."""
        return self.top.sizeHint().height() + self.plot.maximumHeight() + 4

    def wait_for(self, text: str) -> None:
        """Say what is being prepared while there is nothing to draw (empty: drawing)."""
        self.waiting.setText(text)
        self.waiting.setVisible(bool(text))
        self.threshold.setEnabled(not text)
        self.region_line.setEnabled(not text)
        if text:
            vb = self.plot.getPlotItem().getViewBox()
            vb.setRange(xRange=(0, 1), yRange=(0, 1), padding=0)
            self.waiting.setPos(0.5, 0.5)
            self.plot.getPlotItem().getAxis("left").setTicks([[]])

    def set_rows(self, names: list) -> None:
        self.names = list(names)
        ax = self.plot.getPlotItem().getAxis("left")
        ax.setTicks([[(i + 0.5, n) for i, n in enumerate(names)]])
        self.plot.getPlotItem().getViewBox().setYRange(0, len(names), padding=0)
        # rows of ROW_HEIGHT, beside their controls in the gutter
        self.plot.setFixedHeight(ROW_HEIGHT * len(names) + MAP_TOP + MAP_AXIS)

    def draw(self, pic, t0_s: float, t1_s: float) -> None:
        m = np.asarray(pic.magnitudes)
        top = float(m.max()) if m.size else 0.0
        db = 20 * np.log10(np.maximum(m, 1e-300) / (top if top > 0 else 1.0))
        self.image.setImage(np.clip(db, MAP_FLOOR_DB, 0.0), levels=(MAP_FLOOR_DB, 0.0),
                            autoLevels=False)
        self.image.setRect(QRectF(t0_s, 0.0, max(t1_s - t0_s, 1e-9), float(m.shape[0])))
        self.last = db


class LongTraces(PaneFrame):
    """Original and cleaned traces; the cleaned one needs an exact (zoomed-in) view."""

    def __init__(self, parent=None):
        super().__init__("Reconstruction", parent)
        self.show_original = QCheckBox("Original")
        self.show_cleaned = QCheckBox("Cleaned")
        self.show_removed = QCheckBox("Removed")
        for box in (self.show_original, self.show_cleaned, self.show_removed):
            box.setChecked(box is not self.show_removed)
            self.gutter_layout.addWidget(box)
        self.note = QLabel("")
        self.elsewhere = QLabel("Impacts, Events and band lanes are not available for long "
                                "recordings: they need the whole recording in memory.")
        self.elsewhere.setObjectName("hint")
        self.elsewhere.setWordWrap(True)
        self.note.setObjectName("hint")
        self.note.setWordWrap(True)
        self.gutter_layout.addWidget(self.note)
        self.gutter_layout.addStretch(1)
        self.gutter_layout.addWidget(self.elsewhere)
        self.plot = make_plot()
        self.plot.setMinimumHeight(120)
        self.curves = {}
        for name in ("original", "removed", "cleaned"):
            self.curves[name] = self.plot.plot([], [], pen=pg.mkPen(colour("traces", name)),
                                               connect="finite")
        self.content.addWidget(self.plot)
        for box in (self.show_original, self.show_cleaned, self.show_removed):
            box.toggled.connect(self._visibility)
        self.pic = None

    def _visibility(self, *_) -> None:
        self.curves["original"].setVisible(self.show_original.isChecked())
        self.curves["cleaned"].setVisible(self.show_cleaned.isChecked())
        self.curves["removed"].setVisible(self.show_removed.isChecked())

    def draw(self, pic, exact_seconds: float) -> None:
        self.pic = pic
        self.curves["original"].setData(*trace_xy(pic.times, *pic.original))
        for name in ("cleaned", "removed"):
            values = getattr(pic, name)
            if values is None:
                self.curves[name].setData([], [])
            else:
                self.curves[name].setData(*trace_xy(pic.times, *values))
        if pic.exact:
            note = ""
        elif pic.cleaned is None:
            note = ("Drawn from the summary. The cleaned and removed traces follow from a "
                    "pass over the whole recording once the edits rest; zoom in to "
                    f"{exact_seconds:.3g} s or less for them at once.")
        elif pic.cleaned_done < 1.0:
            note = (f"Drawn from the summary; cleaned and removed traces worked out over "
                    f"{100 * pic.cleaned_done:.0f} % of the recording so far.")
        else:
            note = ("Drawn from the summary: per-block lowest and highest values, each block "
                    f"of {1 << BASE} samples or more in the column of its middle.")
        self.note.setText(note)
        self._visibility()


class LongOverview(PaneFrame):
    """The whole recording from the summary, with the part in view marked."""

    def __init__(self, parent=None):
        super().__init__("Overview", parent)
        self.span = QLabel("")
        self.span.setObjectName("hint")
        self.gutter_layout.addWidget(self.span)
        self.plot = make_plot(bottom_axis=False)
        self.plot.setFixedHeight(60)
        self.plot.getPlotItem().getViewBox().setMouseEnabled(x=False, y=False)
        self.curve = self.plot.plot([], [], pen=pg.mkPen(colour("traces", "original")))
        self.region = pg.LinearRegionItem(brush=pg.mkBrush(colour("plot", "overview_region")))
        self.region.setVisible(False)             # until there is a recording to mark
        self.plot.addItem(self.region)
        self.content.addWidget(self.plot)
        self.setFixedHeight(72)

    def draw(self, times_s, lo, hi, duration_s: float) -> None:
        self.curve.setData(*trace_xy(times_s, lo, hi))
        self.plot.getPlotItem().getViewBox().setXRange(0, duration_s, padding=0)
        self.region.blockSignals(True)
        self.region.setBounds((0, duration_s))
        self.region.blockSignals(False)
        self.region.setVisible(True)
        self.duration = duration_s

    def mark(self, t0_s: float, t1_s: float) -> None:
        self.region.blockSignals(True)
        self.region.setRegion((t0_s, t1_s))
        self.region.blockSignals(False)
        self.region.update()
        self.span.setText(f"{t0_s:.6g}–{t1_s:.6g} s of {getattr(self, 'duration', 0):.6g} s")

