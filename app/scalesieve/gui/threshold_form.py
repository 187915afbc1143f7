"""A small form for one threshold: rule, shape, noise estimate, scale (and value)."""

from __future__ import annotations

from PySide6.QtCore import Signal
from PySide6.QtWidgets import QComboBox, QDoubleSpinBox, QFormLayout, QWidget

from scalesieve.core.thresholds import NOISE, RULES, SHAPES

#: what the rule names mean on screen
RULE_LABELS = {"off": "off", "universal": "universal (VisuShrink)", "sure": "SURE",
               "bayes": "BayesShrink", "minimax": "minimax", "manual": "manual value"}
SHORT_RULE = {"universal": "univ", "sure": "SURE", "bayes": "Bayes", "minimax": "minimax",
              "manual": "manual"}
NOISE_LABELS = {"finest": "from level 1", "level": "from each level"}


class ThresholdForm(QWidget):
    """Emits ``changed(dict)`` with rule ('off' or a rule), shape, noise, scale, value."""

    changed = Signal(dict)

    def __init__(self, parent=None):
        super().__init__(parent)
        form = QFormLayout(self)
        form.setContentsMargins(8, 6, 8, 6)
        self.rule = QComboBox()
        for r in ("off",) + tuple(RULES):
            self.rule.addItem(RULE_LABELS.get(r, r), r)
        self.shape = QComboBox()
        for s in SHAPES:
            self.shape.addItem(s, s)
        self.shape.setCurrentIndex(list(SHAPES).index("soft"))
        self.noise = QComboBox()
        for n in NOISE:
            self.noise.addItem(NOISE_LABELS.get(n, n), n)
        self.scale = QDoubleSpinBox()
        self.scale.setRange(0.0, 100.0)
        self.scale.setDecimals(2)
        self.scale.setSingleStep(0.1)
        self.scale.setValue(1.0)
        self.scale.setPrefix("× ")
        self.scale.setKeyboardTracking(False)
        self.value = QDoubleSpinBox()
        self.value.setRange(0.0, 1e9)
        self.value.setDecimals(6)
        self.value.setKeyboardTracking(False)
        form.addRow("rule", self.rule)
        form.addRow("shape", self.shape)
        form.addRow("noise σ", self.noise)
        form.addRow("scale", self.scale)
        form.addRow("value", self.value)
        self.rule.setToolTip("how the threshold λ is chosen; off removes this band's threshold")
        self.noise.setToolTip("σ = median|d|/0.6745 of level 1, or of each level itself")
        self.scale.setToolTip("multiplies the threshold")
        self.value.setToolTip("the threshold in signal units, for the manual rule")
        self._quiet = False
        for w in (self.rule, self.shape, self.noise):
            w.currentIndexChanged.connect(self._emit)
        for w in (self.scale, self.value):
            w.valueChanged.connect(self._emit)
        self._enable()

    def _enable(self) -> None:
        on = self.rule.currentData() != "off"
        for w in (self.shape, self.noise, self.scale):
            w.setEnabled(on)
        self.value.setEnabled(self.rule.currentData() == "manual")
        self.noise.setEnabled(on and self.rule.currentData() != "manual")

    def _emit(self, *_):
        self._enable()
        if not self._quiet:
            self.changed.emit(self.values())

    def values(self) -> dict:
        return {"rule": self.rule.currentData(), "shape": self.shape.currentData(),
                "noise": self.noise.currentData(), "scale": float(self.scale.value()),
                "value": float(self.value.value())}

    def show_edit(self, edit) -> None:
        """Show an edit's threshold (or 'off' for ``None``) without emitting."""
        self._quiet = True
        try:
            if edit is None:
                self.rule.setCurrentIndex(0)
            else:
                self.rule.setCurrentIndex(self.rule.findData(edit.rule))
                self.shape.setCurrentIndex(self.shape.findData(edit.shape))
                self.noise.setCurrentIndex(self.noise.findData(edit.noise))
                self.scale.setValue(float(edit.scale))
                if edit.value is not None:
                    self.value.setValue(float(edit.value))
            self._enable()
        finally:
            self._quiet = False


def short_text(edit) -> str:
    """A button caption for a threshold edit (or 'threshold' when there is none)."""
    if edit is None:
        return "threshold…"
    rule = SHORT_RULE.get(edit.rule, edit.rule)
    sc = f" ×{edit.scale:g}" if edit.scale != 1.0 else ""
    return f"{rule} {edit.shape}{sc}"
