"""The Impulse map: kurtosis of every packet band, depth by frequency, as a picture.

Each row is one depth of the packet tree (depth 1 at the top), each cell one
band of that depth across its frequency range; the colour is the band's
kurtosis (core/impulsive_bands.py).  The most impulsive band is outlined,
and choosing a cell chooses that band for the Envelope spectrum pane.  No
transform is computed here: the core does it, this pane only draws.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QRectF, Qt, Signal
from PySide6.QtGui import QColor, QPen
from PySide6.QtWidgets import (QGraphicsRectItem, QHBoxLayout, QLabel, QSpinBox, QVBoxLayout,
                               QWidget)

from scalesieve.core import impulsive_bands as ib
from scalesieve.core import packets as wp

CAUTION = ("Figures support a judgement about a machine; decisions follow the applicable "
           "standards and qualified people.")
#: colour map of the picture (perceptual, and not the Scale map's default)
COLOURS = "magma"


def table_image(table: dict) -> np.ndarray:
    """(depth, 2^J) array of kurtosis: a band of depth j covers 2^(J-j) columns (NaN: none)."""
    depth = len(table["levels"])
    img = np.full((depth, 2 ** depth), np.nan)
    for lv in table["levels"]:
        j = lv["level"]
        width = 2 ** (depth - j)
        for k, b in enumerate(lv["bands"]):
            if b["kurtosis"] is not None:
                img[j - 1, k * width:(k + 1) * width] = b["kurtosis"]
    return img


def cell_at(hz: float, row: float, depth: int, rate: float) -> tuple[int, int] | None:
    """(depth j, index K) of the cell under a point (frequency in Hz, row from the top)."""
    j = int(np.floor(row)) + 1
    if not 1 <= j <= depth or not 0 <= hz < rate / 2:
        return None
    return j, int(hz // (rate / 2 ** (j + 1)))


class ImpulseMapPane(QWidget):
    """The kurtosis table over depth and frequency; a cell chooses a band."""

    bandChosen = Signal(str)            # a band name wJ.K

    def __init__(self, adapter, parent=None):
        super().__init__(parent)
        self.adapter = adapter
        self.channel = 0
        self.table: dict | None = None
        self._for = None                 # (recording, channel, wavelet, mode, depth) drawn
        col = QVBoxLayout(self)
        col.setContentsMargins(4, 4, 4, 4)
        head = QHBoxLayout()
        title = QLabel("<b>Impulse map</b>")
        head.addWidget(title)
        head.addStretch(1)
        head.addWidget(QLabel("depths 1 to"))
        self.depth = QSpinBox()
        self.depth.setRange(1, 10)
        self.depth.setValue(ib.DEFAULT_DEPTH)
        self.depth.setToolTip("deepest packet level of the table")
        self.depth.valueChanged.connect(lambda _v: self.redraw())
        head.addWidget(self.depth)
        col.addLayout(head)
        self.plot = pg.PlotWidget()
        self.plot.setMenuEnabled(False)
        self.plot.setMouseEnabled(False, False)
        self.plot.hideButtons()
        self.plot.invertY(True)
        self.plot.setLabel("bottom", "frequency (Hz)")
        self.plot.setLabel("left", "packet depth")
        self.image = pg.ImageItem(axisOrder="row-major")
        self.image.setColorMap(pg.colormap.get(COLOURS))
        self.plot.addItem(self.image)
        self.marker = QGraphicsRectItem()
        pen = QPen(QColor("#39d0c0"))
        pen.setWidthF(2.5)
        pen.setCosmetic(True)
        self.marker.setPen(pen)
        self.plot.addItem(self.marker)
        self.chosen = QGraphicsRectItem()
        pen2 = QPen(QColor("#ffffff"))
        pen2.setWidthF(1.5)
        pen2.setStyle(Qt.PenStyle.DashLine)
        pen2.setCosmetic(True)
        self.chosen.setPen(pen2)
        self.plot.addItem(self.chosen)
        self.bar = pg.ColorBarItem(colorMap=pg.colormap.get(COLOURS), interactive=False,
                                   label="kurtosis")
        self.bar.setImageItem(self.image, insert_in=self.plot.getPlotItem())
        self.plot.scene().sigMouseClicked.connect(self._clicked)
        col.addWidget(self.plot, 1)
        self.readout = QLabel("")
        self.readout.setWordWrap(True)
        col.addWidget(self.readout)
        caution = QLabel(CAUTION)
        caution.setWordWrap(True)
        caution.setStyleSheet("color: #8a5a00;")
        col.addWidget(caution)

    # ---------------------------------------------------------------- model

    def set_channel(self, channel: int) -> None:
        self.channel = channel
        if self.isVisible():
            self.redraw()

    def showEvent(self, ev):  # noqa: N802 - Qt API
        super().showEvent(ev)
        self.redraw()

    def redraw(self) -> None:
        rec = self.adapter.recording
        model = self.adapter.model
        if rec is None or model is None:
            return
        ch = min(self.channel, rec.channels - 1)
        spec = model.spec
        import pywt

        top = pywt.dwt_max_level(rec.n, pywt.Wavelet(spec.wavelet).dec_len)
        depth = max(1, min(self.depth.value(), top))
        key = (id(rec), ch, spec.wavelet, spec.mode, depth)
        if key == self._for:
            return
        self.table = ib.table(rec.samples[:, ch], rec.rate, spec.wavelet, spec.mode, depth)
        self._for = key
        self._rate = rec.rate
        img = table_image(self.table)
        finite = img[np.isfinite(img)]
        hi = float(finite.max()) if finite.size else 4.0
        self.image.setImage(np.nan_to_num(img, nan=0.0), autoLevels=False)
        self.image.setRect(QRectF(0.0, 0.0, rec.rate / 2, float(depth)))
        self.bar.setLevels((0.0, max(hi, 4.0)))
        left = self.plot.getAxis("left")
        left.setTicks([[(j - 0.5, str(j)) for j in range(1, depth + 1)]])
        self.plot.setXRange(0, rec.rate / 2, padding=0)
        self.plot.setYRange(0, depth, padding=0)
        best = self.table["best"]
        if best:
            self.marker.setRect(self._cell_rect(best["level"], best["low_hz"], best["high_hz"]))
            self.marker.setVisible(True)
            self.readout.setText(
                f"Most impulsive: <b>{best['name']}</b> ({best['low_hz']:g}–{best['high_hz']:g}"
                f" Hz), kurtosis {best['kurtosis']:.2f} (Gaussian noise: about 3). "
                "Click a cell to demodulate that band.")
        else:
            self.marker.setVisible(False)
            self.readout.setText("No band carries anything beyond round-off.")
        self.chosen.setVisible(False)

    def _cell_rect(self, j: int, lo: float, hi: float) -> QRectF:
        return QRectF(lo, j - 1.0, hi - lo, 1.0)

    # ------------------------------------------------------------- choosing

    def choose(self, name: str) -> None:
        """Mark a band as chosen and tell whoever listens (the Envelope spectrum pane)."""
        jk = wp.parse_name(name)
        if jk is None or self.table is None:
            return
        lo, hi = wp.range_hz(wp.path_of(*jk), self._rate)
        self.chosen.setRect(self._cell_rect(jk[0], lo, hi))
        self.chosen.setVisible(True)
        self.bandChosen.emit(name)

    def _clicked(self, ev) -> None:
        if self.table is None:
            return
        vb = self.plot.getPlotItem().vb
        p = vb.mapSceneToView(ev.scenePos())
        cell = cell_at(p.x(), p.y(), len(self.table["levels"]), self._rate)
        if cell is not None:
            self.choose(f"w{cell[0]}.{cell[1]}")
