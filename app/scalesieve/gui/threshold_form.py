"""A small form for one threshold: rule, shape, noise estimate, scale (and value)."""

from __future__ import annotations

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import QComboBox, QDoubleSpinBox, QFormLayout, QWidget

from scalesieve.core.thresholds import NOISE, RULES, SHAPES

#: what the rule names mean on screen
RULE_LABELS = {"off": "off", "universal": "VisuShrink (universal)", "sure": "SureShrink",
               "bayes": "BayesShrink", "minimax": "minimax (Donoho–Johnstone)",
               "manual": "manual λ"}
#: the paper behind each rule (tooltips)
RULE_TIPS = {
    "universal": "λ = σ√(2 ln n). Donoho & Johnstone 1994, \"Ideal spatial adaptation by "
                 "wavelet shrinkage\", Biometrika 81:425",
    "sure": "per band, the λ minimising Stein's unbiased risk estimate. Donoho & Johnstone "
            "1995, \"Adapting to unknown smoothness via wavelet shrinkage\", JASA 90:1200",
    "bayes": "λ = σ² / σ_x per band. Chang, Yu & Vetterli 2000, \"Adaptive wavelet "
             "thresholding for image denoising and compression\", IEEE TIP 9:1532",
    "minimax": "the minimax λ(n) for n coefficients. Donoho & Johnstone 1994, Biometrika 81:425",
    "manual": "λ in signal units, as given",
    "off": "no threshold on these bands",
}
NOISE_LABELS = {"finest": "σ from the finest band (white noise)",
                "level": "σ per band (coloured noise)"}
NOISE_TIPS = {"finest": "σ = median|d1|/0.6745 (Donoho & Johnstone 1994), carried to every band",
              "level": "each band's own σ = median|d|/0.6745 (Johnstone & Silverman 1997, "
                       "JRSS-B 59:319)"}


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
            self.rule.setItemData(self.rule.count() - 1, RULE_TIPS.get(r, ""),
                                  Qt.ItemDataRole.ToolTipRole)
        self.shape = QComboBox()
        for s in SHAPES:
            self.shape.addItem(s, s)
        self.shape.setCurrentIndex(list(SHAPES).index("soft"))
        self.noise = QComboBox()
        for n in NOISE:
            self.noise.addItem(NOISE_LABELS.get(n, n), n)
            self.noise.setItemData(self.noise.count() - 1, NOISE_TIPS.get(n, ""),
                                   Qt.ItemDataRole.ToolTipRole)
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
        form.addRow("noise", self.noise)
        form.addRow("scale", self.scale)
        form.addRow("value", self.value)
        self.rule.setToolTip("how the threshold λ is chosen (hover a rule for its paper); "
                             "off removes the threshold")
        self.rule.currentIndexChanged.connect(
            lambda _: self.rule.setToolTip(RULE_TIPS.get(self.rule.currentData(), "")))
        self.noise.setToolTip("white noise: one σ from the finest band; coloured noise: "
                              "each band's own σ (median|d|/0.6745)")
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
