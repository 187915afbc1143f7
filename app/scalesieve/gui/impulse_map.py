"""The Impulse map: kurtosis of every packet band, depth by frequency, as a picture.

Each row is one depth of the packet tree (depth 1 at the top), each cell one
band of that depth across its frequency range; the colour is the band's
kurtosis (core/impulsive_bands.py).  The most impulsive band is outlined,
and choosing a cell chooses that band for the Envelope spectrum pane.  No
transform is computed here: the core does it, in a worker thread (the table
of a long recording takes seconds), and this pane only draws.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QRectF, Qt, Signal
from PySide6.QtGui import QColor, QPen
from PySide6.QtWidgets import (QGraphicsRectItem, QHBoxLayout, QLabel, QProgressBar,
                               QSizePolicy, QSpinBox, QVBoxLayout, QWidget)

from scalesieve.core import impulsive_bands as ib
from scalesieve.core.band_choice import interior_count  # noqa: F401 - its old place
from scalesieve.core import packets as wp
from scalesieve.gui import shared_kurtosis
from scalesieve.gui.background_run import BackgroundRun, Outdated  # noqa: F401 - its old place
from scalesieve.gui.pane_frame import plot_min_height, small_axis_labels
from scalesieve.gui.event_guard import reported

CAUTION = ("Figures support a judgement about a machine; decisions follow the applicable "
           "standards and qualified people.")
#: colour map of the picture (perceptual, and not the Scale map's default)
COLOURS = "magma"


def caution_label() -> QLabel:
    """The machine-decisions caution the Impacts dock shows once, under both panes."""
    caution = QLabel(CAUTION)
    caution.setWordWrap(True)
    caution.setStyleSheet("color: #8a5a00;")
    caution.setMinimumHeight(caution.fontMetrics().lineSpacing() + 2)
    return caution


def keep_lines(label: QLabel, lines: int) -> None:
    """Room for ``lines`` lines of a wrapping label: a dock's layout does not ask how many
    its width needs, and a squeezed label would paint its text over the pane above it."""
    label.setMinimumHeight(lines * label.fontMetrics().lineSpacing() + 4)


def busy_bar() -> QProgressBar:
    """A small moving bar shown while a pane's figures are being worked out."""
    bar = QProgressBar()
    bar.setRange(0, 0)                     # no known end: it moves to and fro
    bar.setTextVisible(False)
    bar.setFixedWidth(90)
    bar.setMaximumHeight(12)
    bar.setToolTip("working out the figures in the background")
    bar.hide()
    return bar


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


def readout_text(table: dict, samples: tuple[int, str, str]) -> str:
    """What the map's readout says of its best band: the figure the map shows for that cell
    (``kurtosis``), and the interior figure the choice is made on, or that none stands out."""
    from scalesieve.core import band_choice

    best = table["best"]
    inner = best.get("interior_kurtosis")
    where = f"<b>{best['name']}</b> ({best['low_hz']:g}–{best['high_hz']:g} Hz)"
    if inner is not None:
        if not band_choice.best_stands_out(table, *samples):
            return (f"No band stands out as impulsive: the largest, {where}, has kurtosis "
                    f"{best['kurtosis']:.2f} ({inner:.2f} inside its edges), as Gaussian "
                    "noise gives (3).")
        inside = f", {inner:.2f} inside its edges (the choice uses this)"
    else:
        inside = ""
    return (f"Most impulsive: {where}, kurtosis {best['kurtosis']:.2f} on the map{inside}; "
            "Gaussian noise gives 3.")


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
        self._wanted = None              # the same for the table being worked out
        self.run = BackgroundRun("kurtosis table", self)
        self.run.finished.connect(self._table_ready)
        adapter.add_pending_check(lambda: self.run.busy)
        col = QVBoxLayout(self)
        col.setContentsMargins(4, 3, 4, 2)
        col.setSpacing(3)
        head = QHBoxLayout()
        title = QLabel("<b>Impulse map</b>")
        head.addWidget(title)
        hint = QLabel("click a cell to demodulate it")
        hint.setObjectName("hint")
        hint.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        head.addWidget(hint, 1)
        head.addWidget(QLabel("depths 1 to"))
        self.depth = QSpinBox()
        self.depth.setRange(1, 10)
        self.depth.setValue(ib.DEFAULT_DEPTH)
        self.depth.setToolTip("deepest packet level of the table")
        self.depth.valueChanged.connect(lambda _v: self.redraw())
        self.working = busy_bar()
        head.insertWidget(1, self.working)
        head.addWidget(self.depth)
        col.addLayout(head)
        self.plot = pg.PlotWidget()
        self.plot.setMenuEnabled(False)
        self.plot.setMouseEnabled(False, False)
        self.plot.hideButtons()
        self.plot.invertY(True)
        self.plot.setLabel("bottom", "frequency (Hz)")
        self.plot.setLabel("left", "depth")
        small_axis_labels(self.plot)
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
        self.plot.setMinimumHeight(plot_min_height(self.plot))   # map, bar and labels readable
        self.setMinimumWidth(380)
        col.addWidget(self.plot, 1)
        self.readout = QLabel("")
        self.readout.setWordWrap(True)
        keep_lines(self.readout, 2)
        col.addWidget(self.readout)

    # ---------------------------------------------------------------- model

    def set_channel(self, channel: int) -> None:
        self.channel = channel
        if self.isVisible():
            self.redraw()

    @reported
    def showEvent(self, ev):  # noqa: N802 - Qt API
        super().showEvent(ev)
        # measured once shown: the axes know their fonts and heights only then
        self.plot.setMinimumHeight(plot_min_height(self.plot, 90))
        self.redraw()

    @property
    def busy(self) -> bool:
        """The table is being worked out."""
        return self.run.busy

    def redraw(self) -> None:
        """Ask for the table of what the window shows (worked out in a thread)."""
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
        if key == self._wanted or (key == self._for and not self.run.busy):
            return
        self._wanted = key
        x, rate, wavelet, mode = rec.samples[:, ch], rec.rate, spec.wavelet, spec.mode
        self._samples = (rec.n, wavelet, mode)
        # the samples are never written (edits change gains), so the thread may read them
        # made once for this pane and the envelope pane's "best" (gui/shared_kurtosis.py)
        self.run.request((key, rate), lambda check: shared_kurtosis.table(
            rec, ch, x, rate, wavelet, mode, depth, check=check))
        self.working.show()
        self.readout.setText("Working out the kurtosis of every packet band…")

    def _table_ready(self, job, table, problem) -> None:
        key, rate = job
        self._wanted = None
        self.working.hide()
        if problem is not None:
            self.readout.setText(problem)
            return
        self.table = table
        self._for = key
        self._rate = rate
        depth = key[-1]
        img = table_image(self.table)
        finite = img[np.isfinite(img)]
        hi = float(finite.max()) if finite.size else 4.0
        self.image.setImage(np.nan_to_num(img, nan=0.0), autoLevels=False)
        self.image.setRect(QRectF(0.0, 0.0, rate / 2, float(depth)))
        self.bar.setLevels((0.0, max(hi, 4.0)))
        left = self.plot.getAxis("left")
        left.setTicks([[(j - 0.5, str(j)) for j in range(1, depth + 1)]])
        self.plot.setXRange(0, rate / 2, padding=0)
        self.plot.setYRange(0, depth, padding=0)
        best = self.table["best"]
        if best:
            self.marker.setRect(self._cell_rect(best["level"], best["low_hz"], best["high_hz"]))
            self.marker.setVisible(True)
            self.readout.setText(readout_text(self.table, self._samples))
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
