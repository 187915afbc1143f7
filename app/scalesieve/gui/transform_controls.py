"""Transform controls: kind, wavelet family and order, level, boundary mode.

A change asks the adapter to rerun the model (in its worker thread); quick
successive changes, such as dragging the level slider, coalesce there.
"""

from __future__ import annotations

import pywt
from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (QComboBox, QFormLayout, QHBoxLayout, QLabel, QSlider, QSpinBox,
                               QWidget)

from scalesieve.core import transforms as tf

KIND_LABELS = (("dwt", "DWT (decimated)"), ("swt", "SWT (undecimated)"),
               ("packet", "Packet (equal-width bands)"))
#: packet tilings: (basis, cost) and their labels
BASIS_LABELS = ((("full", "shannon"), "every band at the level"),
                (("best", "shannon"), "least cost (Shannon)"),
                (("best", "log-energy"), "least cost (log energy)"))


def discrete_families() -> list[tuple[str, str, list[str]]]:
    """(short name, long name, wavelets) of each discrete family PyWavelets has."""
    out = []
    shorts = pywt.families(short=True)
    longs = pywt.families(short=False)
    for short, long in zip(shorts, longs):
        names = pywt.wavelist(short, kind="discrete")
        if names:
            out.append((short, long, names))
    return out


def family_of(wavelet: str) -> str:
    for short, _, names in discrete_families():
        if wavelet in names:
            return short
    return "db"


class TransformControls(QWidget):
    """Emits ``specChosen(TransformSpec)`` when the user changes anything."""

    specChosen = Signal(object)

    def __init__(self, parent=None):
        super().__init__(parent)
        self._n = 0
        self._quiet = False
        form = QFormLayout(self)
        form.setContentsMargins(8, 6, 8, 6)
        form.setLabelAlignment(Qt.AlignmentFlag.AlignLeft)
        self.kind = QComboBox()
        for k, label in KIND_LABELS:
            self.kind.addItem(label, k)
        self.kind.setToolTip("DWT: one coefficient per 2^j samples; SWT: one per sample "
                             "(shift invariant, more memory)")
        self.family = QComboBox()
        self._families = discrete_families()
        for short, long, _ in self._families:
            self.family.addItem(long, short)
        self.order = QComboBox()
        self.order.setToolTip("the wavelet within its family")
        self.description = QLabel("")
        self.description.setObjectName("description")
        self.description.setWordWrap(True)
        level_row = QHBoxLayout()
        self.level_slider = QSlider(Qt.Orientation.Horizontal)
        self.level_slider.setMinimum(1)
        self.level_spin = QSpinBox()
        self.level_spin.setMinimum(1)
        self.level_spin.setToolTip("decomposition depth: detail levels d1 (finest) to dJ, "
                                   "and the approximation aJ")
        level_row.addWidget(self.level_slider, 1)
        level_row.addWidget(self.level_spin)
        self.mode = QComboBox()
        for m in tf.MODES:
            self.mode.addItem(m, m)
        self.mode.setToolTip("how the signal is extended past its ends (PyWavelets modes)")
        form.addRow("Transform", self.kind)
        form.addRow("Family", self.family)
        form.addRow("Wavelet", self.order)
        form.addRow("", self.description)
        form.addRow("Level", level_row)
        form.addRow("Boundary", self.mode)
        self.basis = QComboBox()
        for data, label in BASIS_LABELS:
            self.basis.addItem(label, data)
        self.basis.setToolTip("packet bands: all 2^level of equal width, or the tiling of "
                              "least cost (Coifman & Wickerhauser best basis)")
        form.addRow("Tiling", self.basis)
        self.basis.currentIndexChanged.connect(self._changed)
        for box in (self.kind, self.family, self.order, self.mode):
            # Long family names must not widen the dock.
            box.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
            box.setMinimumContentsLength(10)
        self.kind.currentIndexChanged.connect(lambda *_: self._set_level_range())  # SWT goes deeper
        self.kind.currentIndexChanged.connect(self._changed)
        self.family.currentIndexChanged.connect(self._family_changed)
        self.order.currentIndexChanged.connect(self._order_changed)
        self.level_slider.valueChanged.connect(self._slider_moved)
        self.level_spin.valueChanged.connect(self._spin_changed)
        self.mode.currentIndexChanged.connect(self._changed)
        self._fill_orders("db", "db4")

    # -------------------------------------------------------------- showing

    def _fill_orders(self, family: str, wavelet: str | None = None) -> None:
        names = next((n for s, _, n in self._families if s == family), [])
        self.order.blockSignals(True)
        self.order.clear()
        for name in names:
            self.order.addItem(name, name)
        i = self.order.findData(wavelet) if wavelet else 0
        self.order.setCurrentIndex(max(i, 0))
        self.order.blockSignals(False)
        self._describe()

    def _describe(self) -> None:
        w = self.order.currentData()
        self.description.setText(tf.describe_wavelet(w) if w else "")

    def _set_level_range(self) -> None:
        w = self.order.currentData() or "db4"
        if self._n and self.kind.currentData() == "swt":
            top = max(1, tf.swt_max_level(self._n))
        else:
            top = max(1, tf.max_level(self._n, w)) if self._n else 12
        for widget in (self.level_slider, self.level_spin):
            widget.blockSignals(True)
            widget.setMaximum(top)
            widget.blockSignals(False)

    def show_spec(self, spec, n: int) -> None:
        """Show the model's transform (resolved) without asking for a rerun."""
        self._quiet = True
        try:
            self._n = int(n)
            self.kind.setCurrentIndex(self.kind.findData(spec.kind))
            fam = family_of(spec.wavelet)
            self.family.blockSignals(True)
            self.family.setCurrentIndex(self.family.findData(fam))
            self.family.blockSignals(False)
            self._fill_orders(fam, spec.wavelet)
            self._set_level_range()
            for widget in (self.level_slider, self.level_spin):
                widget.blockSignals(True)
                widget.setValue(int(spec.level))
                widget.blockSignals(False)
            self.mode.setCurrentIndex(self.mode.findData(spec.mode))
            if spec.kind == "packet":
                # a resolved best basis is a list of paths; its cost says which rule chose it
                chosen = ("full", "shannon") if spec.basis == "full" else ("best", spec.cost)
                self.basis.setCurrentIndex(max(0, self.basis.findData(chosen)))
            self.basis.setEnabled(spec.kind == "packet")
        finally:
            self._quiet = False

    def spec(self) -> tf.TransformSpec:
        kind = self.kind.currentData()
        basis, cost = self.basis.currentData() if kind == "packet" else ("full", "shannon")
        return tf.TransformSpec(kind=kind, wavelet=self.order.currentData(),
                                level=int(self.level_spin.value()), mode=self.mode.currentData(),
                                basis=basis, cost=cost)

    # ------------------------------------------------------------- changing

    def _family_changed(self, *_):
        fam = self.family.currentData()
        self._fill_orders(fam)
        self._order_changed()

    def _order_changed(self, *_):
        self._describe()
        old = self.level_spin.value()
        self._set_level_range()
        # A longer filter may allow fewer levels: keep the depth if it still fits.
        for widget in (self.level_slider, self.level_spin):
            widget.blockSignals(True)
            widget.setValue(min(old, widget.maximum()))
            widget.blockSignals(False)
        self._changed()

    def _slider_moved(self, v: int) -> None:
        self.level_spin.blockSignals(True)
        self.level_spin.setValue(v)
        self.level_spin.blockSignals(False)
        self._changed()

    def _spin_changed(self, v: int) -> None:
        self.level_slider.blockSignals(True)
        self.level_slider.setValue(v)
        self.level_slider.blockSignals(False)
        self._changed()

    def _changed(self, *_):
        if not self._quiet:
            self.specChosen.emit(self.spec())
