"""Reconstruction pane: original, cleaned and removed traces, and what the recipe did."""

from __future__ import annotations

import math

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, QTimer, Signal
from PySide6.QtGui import QFontMetrics
from PySide6.QtWidgets import QCheckBox, QHBoxLayout, QLabel

from scalesieve.views.channel_units import unit_of
from scalesieve.views.decimate import trace_points
from scalesieve.gui.pane_frame import PaneFrame, make_plot, tick_font
from scalesieve.gui.resource_files import colour

#: the three traces: key, label, what they show
TRACES = (("original", "Original", "the recording as read"),
          ("cleaned", "Cleaned", "after the recipe"),
          ("removed", "Removed", "original minus cleaned"))
#: least heights of the two lanes: the cleaned-over-original one, and the removed one
#: with the time axis under it (30 px, pane_frame.make_plot)
MAIN_LANE_MIN, REMOVED_LANE_MIN = 32, 58
#: wait this long after the last edit before recomputing the metrics (ms)
METRICS_DELAY_MS = 250


#: what the metrics are when no edit reaches the channel
NOTHING_REMOVED = {"energy_removed_fraction": 0.0, "changed_fraction": 0.0, "snr_db": None,
                   "peak_change": 0.0}


def format_metrics(m: dict) -> str:
    """One line of what the recipe did (values from ``DecompositionModel.metrics``)."""
    snr = m.get("snr_db")
    snr_text = "∞ (nothing removed)" if snr is None or not math.isfinite(snr) else f"{snr:.1f} dB"
    return (f"energy removed {100 * m['energy_removed_fraction']:.3g} %   ·   "
            f"coefficients changed {100 * m['changed_fraction']:.3g} %   ·   "
            f"SNR of cleaned vs original {snr_text}   ·   "
            f"peak change {m['peak_change']:.4g}")


def sparse_ticks(lo: float, hi: float, room_px: float | None = None,
                 label_px: float = 12.0) -> list:
    """pyqtgraph ticks for a short lane: 0 and one round value above it, no minor ones
    (two labels half a lane apart cannot overlap).  When the lane is ``room_px`` high and
    two labels of ``label_px`` would still touch, one label at 0 says its size: ``±m``
    (a label near the lane's edge would stick out of the axis, which drops it)."""
    top = max(abs(lo), abs(hi))
    if not (top > 0 and math.isfinite(top)):
        return [[(0.0, "0")], []]
    step = 10.0 ** math.floor(math.log10(top))
    m = math.floor(top / step) * step
    if m > 0.9 * top:          # keep the label off the lane's very edge
        m = (math.floor(top / step) - 1) * step or step / 2
    side = m if abs(hi) >= abs(lo) else -m      # the round value on the wider side
    if room_px is not None and lo <= side <= hi:
        gap = abs(side) / (hi - lo) * room_px    # pixels between the two labels' centres
        if gap < 1.2 * label_px:
            return [[(0.0 if lo <= 0.0 <= hi else side, f"±{m:.2g}")], []]
    ticks = [(v, "0" if v == 0 else f"{v:.2g}") for v in (0.0, side) if lo <= v <= hi]
    return [ticks, []]


class ReconstructionPane(PaneFrame):
    """Draws the current channel's original, cleaned and removed signals."""

    metricsUpdated = Signal(dict)

    def __init__(self, adapter, time_axis, parent=None):
        super().__init__("Reconstruction", parent)
        self.adapter = adapter
        self.axis = time_axis
        self.channel = 0
        self.metrics: dict | None = None
        # Cleaned over a lighter original; what was removed in its own lane below, on
        # its own scale: neither hides the other.
        self.plot = make_plot(bottom_axis=False)
        self.plot.getPlotItem().showGrid(x=True, y=True, alpha=0.25)
        self.content.addWidget(self.plot, 3)
        self.removed_plot = make_plot()
        self.removed_plot.getPlotItem().showGrid(x=True, y=True, alpha=0.25)
        self.content.addWidget(self.removed_plot, 2)
        self.metrics_label = QLabel("")
        self.metrics_label.setObjectName("metrics")
        # the whole pane's width (one line at 1280 px with the Recipe dock open); narrower,
        # the line wraps: it must neither widen the window nor be cut
        self.metrics_label.setWordWrap(True)
        self.metrics_label.setContentsMargins(8, 1, 6, 2)
        foot = QHBoxLayout()
        foot.setContentsMargins(0, 0, 0, 0)
        foot.addWidget(self.metrics_label, 1)
        hint = QLabel("wheel: zoom time · drag: pan")
        hint.setObjectName("hint")
        hint.setContentsMargins(6, 1, 8, 2)
        foot.addWidget(hint, 0, Qt.AlignmentFlag.AlignTop)
        self.footer.addLayout(foot)
        # each lane keeps room to show its trace (the removed one also holds the time axis)
        self.plot.setMinimumHeight(MAIN_LANE_MIN)
        self.removed_plot.setMinimumHeight(REMOVED_LANE_MIN)
        self.curves = {}
        self.toggles = {}
        widths = {"original": 1.0, "cleaned": 1.0, "removed": 1.0}
        for key, label, tip in TRACES:
            pen = pg.mkPen(colour("traces", key), width=widths[key])
            curve = pg.PlotDataItem(pen=pen, connect="all", skipFiniteCheck=True)
            curve.setZValue({"original": 1, "cleaned": 2, "removed": 3}[key])
            (self.removed_plot if key == "removed" else self.plot).addItem(curve)
            self.curves[key] = curve
            box = QCheckBox(label)
            box.setChecked(True)
            box.setToolTip(f"show or hide the {label.lower()} trace ({tip})")
            box.setStyleSheet(
                f"QCheckBox {{ color: {colour('traces', key)}; font-weight: 600; }}")
            box.toggled.connect(lambda on, k=key: self._toggle(k, on))
            self.gutter_layout.addWidget(box)
            self.toggles[key] = box
        self.gutter_layout.addStretch(1)
        self.axis.link(self.plot.getViewBox())
        self.axis.link(self.removed_plot.getViewBox())
        self.axis.rangeChanged.connect(self._schedule)
        self._redraw_timer = QTimer(self)
        self._redraw_timer.setSingleShot(True)
        self._redraw_timer.setInterval(0)
        self._redraw_timer.timeout.connect(self.redraw)
        self._metrics_timer = QTimer(self)
        self._metrics_timer.setSingleShot(True)
        self._metrics_timer.setInterval(METRICS_DELAY_MS)
        self._metrics_timer.timeout.connect(self._metrics_due)
        adapter.modelReplaced.connect(self._on_model)
        adapter.recipeChanged.connect(self._on_recipe)
        adapter.tracesRefined.connect(self._on_refined)
        self.plot.getViewBox().sigResized.connect(self._schedule)

    # ------------------------------------------------------------- updates

    def set_channel(self, channel: int) -> None:
        self.channel = channel
        self._show_unit()
        self.redraw()
        self.update_metrics()

    def _show_unit(self) -> None:
        m = self.adapter.model
        unit = ""
        if m is not None and self.channel < m.recording.channels:
            unit = unit_of(m.recording.channel_names[self.channel])
        for plot in (self.plot, self.removed_plot):
            ax = plot.getPlotItem().getAxis("left")
            ax.enableAutoSIPrefix(False)     # the values as they are, in the channel's unit
            ax.setLabel(unit)
            ax.label.setFont(tick_font())
            # the removed lane is short and in the same unit: named on the lane above only
            ax.showLabel(bool(unit) and plot is self.plot)

    def _on_model(self) -> None:
        self._show_unit()
        self.redraw()
        m = self.adapter.model
        if m is not None and not any(e.applies_to(self.channel) for e in m.edits):
            # Nothing edits this channel: cleaned is the original, nothing is removed.
            self.metrics = None
            self.metrics_label.setText(format_metrics(NOTHING_REMOVED))
            return
        # A full pass over every band: after the first paint, not before it.
        self._metrics_timer.start()

    def _on_recipe(self, change) -> None:
        if self.channel in change.channels:
            self.redraw()
            if self.metrics is not None:
                # The metrics take a full pass; the traces do not wait for them.
                self.metrics_label.setText(format_metrics(self.metrics) + "   (updating…)")
            self._metrics_timer.start()

    def _on_refined(self, channel: int) -> None:
        if channel == self.channel:
            self._schedule()

    def _toggle(self, key: str, on: bool) -> None:
        self.curves[key].setVisible(on)
        self.redraw()

    def _schedule(self, *args) -> None:
        self._redraw_timer.start()

    def _metrics_due(self) -> None:
        if self.adapter.refining():
            # the figures would pay the sweep's passes at once: after it, instead
            self._metrics_timer.start()
            return
        self.update_metrics()

    def update_metrics(self) -> None:
        m = self.adapter.model
        if m is None or self.channel >= m.recording.channels:
            return
        self.metrics = m.metrics(self.channel)
        self.metrics_label.setText(format_metrics(self.metrics))
        self.metricsUpdated.emit(self.metrics)

    def trace_data(self, key: str) -> tuple[np.ndarray, np.ndarray]:
        """The points drawn for one trace (what is on screen now)."""
        return self.curves[key].getData()

    def redraw(self) -> None:
        pic = self.adapter.pictures(self.channel)
        if pic is None:
            return
        m = self.adapter.model
        width = max(50, int(self.plot.getViewBox().width()))
        t0, t1 = self.axis.t0, self.axis.t1
        ch = self.channel
        fetch = {"original": None, "cleaned": None, "removed": None}
        if m is not None and ch < m.recording.channels:
            x = m.original(ch)
            # exact samples of the span drawn, whether or not a deferred pass is paid yet
            fetch = {"original": lambda a, b: x[a:b],
                     "cleaned": lambda a, b: m.cleaned_view(ch, a, b),
                     "removed": lambda a, b: x[a:b] - m.cleaned_view(ch, a, b)}
        envs = {"original": pic.original, "cleaned": pic.cleaned, "removed": pic.removed}
        ranges = {id(self.plot): [math.inf, -math.inf],
                  id(self.removed_plot): [math.inf, -math.inf]}
        for key, curve in self.curves.items():
            if not self.toggles[key].isChecked():
                curve.setData([], [])
                continue
            xs, ys = trace_points(0.0, 1.0 / pic.rate, pic.n, t0, t1, width, fetch[key],
                                  envs[key])
            curve.setData(xs, ys)
            r = ranges[id(self.removed_plot if key == "removed" else self.plot)]
            if ys.size:
                r[0], r[1] = min(r[0], float(ys.min())), max(r[1], float(ys.max()))
        main_lo, main_hi = ranges[id(self.plot)]
        r = ranges[id(self.removed_plot)]
        if math.isfinite(main_lo) and math.isfinite(main_hi):
            # nothing (or round-off) removed: a flat line on a scale a tenth of the signal's
            floor = 0.05 * (main_hi - main_lo)
            r[0], r[1] = min(r[0], -floor), max(r[1], floor)
        for plot in (self.plot, self.removed_plot):
            lo, hi = ranges[id(plot)]
            if math.isfinite(lo) and math.isfinite(hi):
                pad = 0.06 * (hi - lo) if hi > lo else max(abs(hi), 1e-12)
                plot.getViewBox().setYRange(lo - pad, hi + pad, padding=0)
                if plot is self.removed_plot:
                    # a short lane: three labels at most, so they never overlap
                    label = QFontMetrics(tick_font()).height()    # make_plot's tick type
                    plot.getAxis("left").setTicks(sparse_ticks(
                        lo - pad, hi + pad, plot.getViewBox().height(), label))
