"""Overview strip: the whole recording, with the span the panes show marked on it."""

from __future__ import annotations

import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtGui import QColor
from PySide6.QtWidgets import QHBoxLayout, QLabel, QToolButton

from scalesieve.views.decimate import trace_points
from scalesieve.gui.pane_frame import PaneFrame, make_plot
from scalesieve.gui.resource_files import colour, icon
from scalesieve.gui.event_guard import reported

#: title and "all" on one line, the span shown below: two lines of text
HEIGHT = 48


class _OverviewBox(pg.ViewBox):
    """No zooming here: a click centres the view, the marked span is dragged."""

    def __init__(self, strip):
        super().__init__()
        self.strip = strip
        self.setMouseEnabled(x=False, y=False)
        self.setMenuEnabled(False)

    @reported
    def mouseClickEvent(self, ev):
        if ev.button() == Qt.MouseButton.LeftButton:
            ev.accept()
            self.strip.centre_on(self.mapToView(ev.pos()).x())

    @reported(once=True)
    def wheelEvent(self, ev, axis=None):
        ev.accept()
        self.strip.axis.zoom(0.8 if ev.delta() > 0 else 1.25)


class OverviewStrip(PaneFrame):
    def __init__(self, adapter, time_axis, parent=None):
        super().__init__("Overview", parent)
        self.setFixedHeight(HEIGHT)
        self.gutter_layout.setContentsMargins(8, 2, 8, 2)
        self.gutter_layout.setSpacing(0)
        self.adapter = adapter
        self.axis = time_axis
        self.channel = 0
        self.box = _OverviewBox(self)
        self.plot = make_plot(self.box, bottom_axis=False, left_axis=False)
        self.content.addWidget(self.plot)
        self.curve = pg.PlotDataItem(pen=pg.mkPen(colour("traces", "original"), width=1),
                                     connect="all", skipFiniteCheck=True)
        self.plot.addItem(self.curve)
        brush = QColor(colour("plot", "overview_region"))
        self.region = pg.LinearRegionItem(values=(0, 1), brush=brush,
                                          pen=pg.mkPen(colour("traces", "cleaned"), width=1.5))
        self.region.setZValue(10)
        self.plot.addItem(self.region)
        self.region.sigRegionChanged.connect(self._region_moved)
        self.span_label = QLabel("")
        self.span_label.setObjectName("hint")
        self.title.setText("Overview")
        fit = QToolButton()
        fit.setIcon(icon("fit"))
        fit.setText("all")
        fit.setToolButtonStyle(Qt.ToolButtonStyle.ToolButtonTextBesideIcon)
        fit.setToolTip("show the whole recording in every pane")
        fit.clicked.connect(self.axis.show_all)
        self.gutter_layout.removeWidget(self.title)
        top = QHBoxLayout()
        top.addWidget(self.title)
        top.addStretch(1)
        top.addWidget(fit)
        self.gutter_layout.addLayout(top)
        self.gutter_layout.addWidget(self.span_label)
        self._moving = False
        self.axis.rangeChanged.connect(self._axis_moved)
        adapter.modelReplaced.connect(self.redraw)

    def set_channel(self, channel: int) -> None:
        self.channel = channel
        self.redraw()

    def centre_on(self, t: float) -> None:
        half = 0.5 * (self.axis.t1 - self.axis.t0)
        self.axis.set_range(t - half, t + half)

    def redraw(self) -> None:
        pic = self.adapter.pictures(self.channel)
        if pic is None:
            return
        dur = pic.n / pic.rate
        width = max(50, int(self.box.width()))
        m = self.adapter.model
        fetch = None
        if m is not None and self.channel < m.recording.channels:
            x = m.original(self.channel)
            fetch = lambda a, b: x[a:b]  # noqa: E731
        xs, ys = trace_points(0.0, 1.0 / pic.rate, pic.n, 0.0, dur, width, fetch, pic.original)
        self.curve.setData(xs, ys)
        self.box.setXRange(0, dur, padding=0)
        if ys.size:
            lo, hi = float(ys.min()), float(ys.max())
            pad = 0.05 * (hi - lo) if hi > lo else 1.0
            self.box.setYRange(lo - pad, hi + pad, padding=0)
        self.region.setBounds((0, dur))
        self._axis_moved(self.axis.t0, self.axis.t1)

    @reported(once=True)
    def resizeEvent(self, ev):
        super().resizeEvent(ev)
        self.redraw()

    def _axis_moved(self, t0: float, t1: float) -> None:
        self._moving = True
        try:
            self.region.setRegion((t0, t1))
        finally:
            self._moving = False
        self.span_label.setText(f"{t0:.4g}–{t1:.4g} s of {self.axis.duration:.4g} s")

    def _region_moved(self) -> None:
        if self._moving:
            return
        a, b = self.region.getRegion()
        self.axis.set_range(a, b)
