"""The transform as one line above the Scale map, opening a compact editor.

The line reads ``DWT · db4 · 11 levels · symmetric``; clicking it opens the
transform controls with a picture of the chosen wavelet (PyWavelets
``Wavelet.wavefun``) and its properties.  Before a recording is loaded the
level is "chosen for the recording", which is what the model will do.
"""

from __future__ import annotations

import pyqtgraph as pg
import pywt
from PySide6.QtCore import Signal
from PySide6.QtWidgets import QMenu, QToolButton, QVBoxLayout, QWidget, QWidgetAction

from scalesieve.core import transforms as tf
from scalesieve.gui.resource_files import colour
from scalesieve.gui.transform_controls import TransformControls


def spec_line(spec, n: int | None = None) -> str:
    """``DWT · db4 · 11 levels · symmetric`` (level unknown: "levels for the recording")."""
    level = spec.level
    if level is None and n:
        level = spec.resolved(n).level
    lv = "levels chosen for the recording" if level is None else (
        f"{level} level" + ("s" if level != 1 else ""))
    return f"{spec.kind.upper()} · {spec.wavelet} · {lv} · {spec.mode}"


def wavelet_shape(name: str, points_level: int = 6):
    """(x, psi) of a wavelet's wavelet function, from PyWavelets' cascade."""
    w = pywt.Wavelet(name)
    out = w.wavefun(level=points_level)
    # orthogonal: (phi, psi, x); biorthogonal: (phi_d, psi_d, phi_r, psi_r, x)
    return out[-1], out[1]


class WaveletShape(pg.PlotWidget):
    """A small picture of the wavelet function of the chosen wavelet."""

    def __init__(self, parent=None):
        super().__init__(parent, background=colour("plot", "background"))
        self.setFixedSize(300, 128)         # a caption line above the curve
        pi = self.getPlotItem()
        pi.hideButtons()
        pi.setMenuEnabled(False)
        pi.hideAxis("left")
        pi.getAxis("bottom").setHeight(18)
        self.curve = pi.plot(pen=pg.mkPen(colour("traces", "band"), width=1.5))
        self.setMouseEnabled(x=False, y=False)

    def show_wavelet(self, name: str) -> None:
        x, psi = wavelet_shape(name)
        self.curve.setData(x, psi)
        # what the curve is: without a caption the picture is an unnamed wiggle
        self.getPlotItem().setTitle(f"wavelet function ψ of {name}, over its support",
                                    size="8pt")
        self.getPlotItem().autoRange()


class TransformEditor(QWidget):
    """Transform controls, the wavelet's shape and its properties."""

    def __init__(self, parent=None):
        super().__init__(parent)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(6, 6, 6, 6)
        self.controls = TransformControls()
        self.shape = WaveletShape()
        lay.addWidget(self.controls)
        lay.addWidget(self.shape)
        self.setMinimumWidth(320)
        self.controls.order.currentIndexChanged.connect(self._show_shape)
        self._show_shape()

    def _show_shape(self, *_):
        w = self.controls.order.currentData()
        if w:
            self.shape.show_wavelet(w)
            self.shape.setToolTip(f"wavelet function ψ of {w} (PyWavelets wavefun): "
                                  f"{tf.describe_wavelet(w)}")


class TransformLine(QToolButton):
    """One line naming the transform; a click opens the editor."""

    specChosen = Signal(object)

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setObjectName("transformLine")
        self.setPopupMode(QToolButton.ToolButtonPopupMode.InstantPopup)
        self.setToolTip("the transform: click to change kind, wavelet, levels or boundary mode")
        self.editor = TransformEditor()
        menu = QMenu(self)
        act = QWidgetAction(menu)
        act.setDefaultWidget(self.editor)
        menu.addAction(act)
        self.setMenu(menu)
        self.controls.specChosen.connect(self._chosen)
        self._n = 0
        self.show_default()

    def show_default(self) -> None:
        """Before any recording: the defaults a recording will get, in the controls too."""
        spec = tf.TransformSpec()
        c = self.controls
        c._quiet = True
        try:
            c.kind.setCurrentIndex(c.kind.findData(spec.kind))
            c.mode.setCurrentIndex(c.mode.findData(spec.mode))
        finally:
            c._quiet = False
        self.setText(spec_line(spec))

    @property
    def controls(self) -> TransformControls:
        return self.editor.controls

    def _chosen(self, spec) -> None:
        self.setText(spec_line(spec, self._n))
        self.specChosen.emit(spec)

    def show_spec(self, spec, n: int) -> None:
        self._n = int(n)
        self.controls.show_spec(spec, n)
        self.editor._show_shape()
        self.setText(spec_line(spec, n))
