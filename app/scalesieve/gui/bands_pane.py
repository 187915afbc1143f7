"""Bands pane: every level's time-domain component on the shared time axis.

Each row names its band (Hz range, energy share, kurtosis) and carries a
keep/mute toggle, a gain in dB and a threshold control.  Every control
makes or changes one entry of the Recipe: the band's own gain edit and its
own threshold edit (``levels`` is just that band); edits spanning several
bands are edited in the Recipe pane and are still drawn here.
"""

from __future__ import annotations

import html
import math
from dataclasses import replace

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, QTimer, Signal
from PySide6.QtWidgets import (QComboBox, QDoubleSpinBox, QFrame, QHBoxLayout, QLabel, QMenu,
                               QScrollArea, QSizePolicy, QStyle, QToolButton, QVBoxLayout, QWidget,
                               QWidgetAction)

from scalesieve.gui.band_labels import db_to_gain, gain_to_db, hz_range
from scalesieve.gui.decimate import trace_points
from scalesieve.gui.pane_frame import GUTTER_WIDTH, RIGHT_MARGIN, make_plot
from scalesieve.gui.resource_files import colour
from scalesieve.gui.scale_map import first_and_step
from scalesieve.gui.threshold_form import ThresholdForm, short_text
from scalesieve.recipe import Edit

ROW_HEIGHT = 34
#: rows share the pane's height within these bounds (scrolling beyond)
ROW_MIN, ROW_MAX = 28, 46
AXIS_HEIGHT = 30
GAIN_RANGE_DB = (-60.0, 24.0)
#: quick thresholds over all detail levels: label -> (rule, shape)
ALL_DETAILS = (("universal, soft", "universal", "soft"), ("BayesShrink, soft", "bayes", "soft"),
               ("SURE, soft", "sure", "soft"), ("minimax, soft", "minimax", "soft"),
               ("universal, hard", "universal", "hard"))


def short_number(v: float) -> str:
    """Two significant digits, without exponents for the usual sizes (fits the margin)."""
    a = abs(v)
    if a >= 100:
        return f"{v:.0f}"
    if a >= 1e-4 or a == 0:
        return f"{v:.2g}"
    return f"{v:.1e}"


def percent_text(share: float) -> str:
    """An energy share for a narrow label: ``24%``, ``0.46%``, ``<0.01%``."""
    p = 100.0 * share
    if p == 0:
        return "0%"
    if p < 0.01:
        return "<0.01%"
    return f"{p:.2g}%" if p < 10 else f"{p:.0f}%"


def own_edit(edits, op: str, key, channels):
    """Index and edit of the band's own edit of ``op`` (levels exactly that band)."""
    for i, e in enumerate(edits):
        if e.op == op and isinstance(e.levels, tuple) and e.levels == (key,) \
                and e.channels == channels:
            return i, e
    return -1, None


def edits_on_band(edits, key, channel: int, level: int) -> list[int]:
    """Indices of the enabled edits that touch a band of a channel."""
    out = []
    for i, e in enumerate(edits):
        if not e.applies_to(channel):
            continue
        try:
            if key in e.band_keys(level):
                out.append(i)
        except ValueError:
            continue
    return out


class BandRow(QWidget):
    """Controls and trace of one band."""

    def __init__(self, pane: "BandsPane", key, last: bool):
        super().__init__()
        self.setObjectName("bandRow")
        self.pane = pane
        self.key = key
        self.last = last
        self.setFixedHeight(ROW_HEIGHT + (AXIS_HEIGHT if last else 0))
        row = QHBoxLayout(self)
        row.setContentsMargins(0, 0, 0, 0)
        row.setSpacing(0)

        controls = QWidget()
        controls.setObjectName("gutter")
        controls.setFixedWidth(GUTTER_WIDTH)
        c = QHBoxLayout(controls)
        c.setContentsMargins(8, 2, 6, 2 + (AXIS_HEIGHT if last else 0))
        c.setAlignment(Qt.AlignmentFlag.AlignTop)
        c.setSpacing(4)
        self.keep = QToolButton()
        self.keep.setObjectName("keepToggle")
        self.keep.setCheckable(True)
        self.keep.setText("keep")
        self.keep.setToolTip("mute this band (a gain edit of 0 in the Recipe); click again to keep")
        self.gain = QDoubleSpinBox()
        self.gain.setRange(*GAIN_RANGE_DB)
        self.gain.setDecimals(1)
        self.gain.setSingleStep(1.0)
        self.gain.setSuffix(" dB")
        self.gain.setKeyboardTracking(False)
        self.gain.setToolTip("gain of this band in dB (a gain edit in the Recipe)")
        self.gain.setFixedWidth(74)
        self.threshold = QToolButton()
        self.threshold.setObjectName("thresholdButton")
        self.threshold.setText("threshold…")
        self.threshold.setPopupMode(QToolButton.ToolButtonPopupMode.InstantPopup)
        self.threshold.setToolTip("threshold this band: rule, shape, noise estimate, scale")
        self.threshold.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Fixed)
        menu = QMenu(self.threshold)
        self.form = ThresholdForm()
        act = QWidgetAction(menu)
        act.setDefaultWidget(self.form)
        menu.addAction(act)
        self.threshold.setMenu(menu)
        c.addWidget(self.keep)
        c.addWidget(self.gain)
        c.addWidget(self.threshold, 1)
        row.addWidget(controls)

        self.plot = make_plot(bottom_axis=last, left_axis=False)
        self.plot.setFixedHeight(ROW_HEIGHT + (AXIS_HEIGHT if last else 0))
        vb = self.plot.getViewBox()
        self.info = QLabel(self.plot)
        self.info.setObjectName("bandInfo")
        self.info.setTextFormat(Qt.TextFormat.RichText)
        self.info.move(6, 2)
        self.info.setAttribute(Qt.WidgetAttribute.WA_TransparentForMouseEvents, False)
        self.base = pg.PlotDataItem(pen=pg.mkPen(colour("traces", "band_original"), width=1),
                                    connect="all", skipFiniteCheck=True)
        self.curve = pg.PlotDataItem(pen=pg.mkPen(colour("traces", "band"), width=1),
                                     connect="all", skipFiniteCheck=True)
        self.base.setZValue(1)
        self.curve.setZValue(2)
        tpen = pg.mkPen(colour("traces", "threshold"), width=1, style=Qt.PenStyle.DashLine)
        self.thr_hi = pg.InfiniteLine(angle=0, movable=False, pen=tpen)
        self.thr_lo = pg.InfiniteLine(angle=0, movable=False, pen=tpen)
        for it in (self.base, self.curve):
            self.plot.addItem(it)
        for line in (self.thr_hi, self.thr_lo):
            line.setZValue(3)
            line.hide()
            self.plot.addItem(line, ignoreBounds=True)
        row.addWidget(self.plot, 1)
        # The band's scale (and threshold) sit in the right margin, off the trace.
        self.scale_label = QLabel("")
        self.scale_label.setObjectName("bandInfo")
        self.scale_label.setFixedWidth(RIGHT_MARGIN - pane.scrollbar_width)
        self.scale_label.setAlignment(Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignTop)
        self.scale_label.setContentsMargins(4, 3, 0, 0)
        row.addWidget(self.scale_label)
        pane.axis.link(vb)

        self.keep.toggled.connect(self._keep_toggled)
        self.gain.valueChanged.connect(self._gain_changed)
        self.form.changed.connect(self._threshold_changed)
        self._quiet = False
        self.threshold_value: float | None = None

    def set_row_height(self, h: int) -> None:
        total = h + (AXIS_HEIGHT if self.last else 0)
        self.setFixedHeight(total)
        self.plot.setFixedHeight(total)

    # ---------------------------------------------------------- from the model

    def show_state(self, model, pictures, channel: int) -> None:
        """Show the band's figures and the recipe's say on it, without emitting."""
        key = self.key
        lo, hi = model.band_range_hz(key)
        # the model's band table; on a long recording it comes a moment later
        st = pictures.stats.get(key) or {"kurtosis": None, "energy_fraction": None,
                                         "count": model.coefficients(channel, key).shape[0]}
        kurt = st["kurtosis"]
        kurt_text = "–" if kurt is None else f"{kurt:.3g}"
        name = model.band_name(key)
        share = st["energy_fraction"]
        share_text = "…" if share is None else percent_text(share)
        info = (f"<b>{name}</b>&nbsp; {hz_range(lo, hi)}<br>"
                f"{html.escape(share_text)} · kurt {kurt_text}")
        if info != self.info.text():
            self.info.setText(info)
            self.info.adjustSize()
        scope = self.pane.adapter.edit_channels(channel)
        edits = model.edits
        _, g = own_edit(edits, "gain", key, scope)
        _, t = own_edit(edits, "threshold", key, scope)
        touching = edits_on_band(edits, key, channel, model.spec)
        tip = [f"{name}: {hz_range(lo, hi)}, {st['count']} coefficients, "
               + ("figures still being worked out, " if share is None else
                  f"{100 * share:.4g} % of the energy, ") + f"kurtosis {kurt_text} "
               f"(3 for Gaussian noise; large for impulsive bands)"]
        tip += [f"edit {i + 1}: {edits[i].summary()}" for i in touching]
        self.info.setToolTip("\n".join(tip))
        self._quiet = True
        try:
            muted = g is not None and g.enabled and g.gain == 0.0
            self.keep.setChecked(muted)
            self.keep.setText("muted" if muted else "keep")
            if g is not None and g.gain > 0:
                self.gain.setValue(gain_to_db(g.gain))
            elif g is None:
                self.gain.setValue(0.0)
            self.form.show_edit(t)
            self.threshold.setText(short_text(t))
            active = t is not None and t.enabled
            if self.threshold.property("active") != active:
                # The style sheet colours an active threshold; it reads the property on polish.
                self.threshold.setProperty("active", active)
                self.threshold.style().unpolish(self.threshold)
                self.threshold.style().polish(self.threshold)
        finally:
            self._quiet = False
        self.setProperty("muted", muted)
        band_col = colour("traces", "band_muted") if muted else colour("traces", "band")
        self.curve.setPen(pg.mkPen(band_col, width=1))
        # The threshold drawn is the last enabled one acting on this band.
        self.threshold_value = None
        for i in reversed(touching):
            if edits[i].op == "threshold":
                self.threshold_value = float(model.threshold_for(channel, key, edits[i]))
                break

    # ------------------------------------------------------------ to the model

    def _scope(self):
        return self.pane.adapter.edit_channels(self.pane.channel)

    def _keep_toggled(self, muted: bool) -> None:
        self.keep.setText("muted" if muted else "keep")
        if self._quiet:
            return
        gain = 0.0 if muted else db_to_gain(self.gain.value())
        self.pane.set_band_gain(self.key, gain, self._scope())

    def _gain_changed(self, db: float) -> None:
        if self._quiet:
            return
        # A new gain also un-mutes: the control shows what the band gets.
        self.pane.set_band_gain(self.key, db_to_gain(db), self._scope())

    def _threshold_changed(self, values: dict) -> None:
        if self._quiet:
            return
        self.pane.set_band_threshold(self.key, values, self._scope())

    # --------------------------------------------------------------- drawing

    def draw(self, model, pictures, channel: int, mode: str, t0: float, t1: float) -> None:
        width = max(50, int(self.plot.getViewBox().width()))
        key = self.key
        edited_any = pictures.band_is_edited(key)
        pending = False
        if mode == "coefficients":
            if model is None:
                return
            c = model.coefficients(channel, key)
            first, step = first_and_step(model, key)
            g = model.band_gain(channel, key)
            if g is None:
                fe = lambda a, b: model.edited_coefficients(channel, key, a, b)  # noqa: E731
            else:
                fe = lambda a, b: c[a:b] * g  # noqa: E731 - small local readers
            xs, ys = trace_points(first, step, c.shape[0], t0, t1, width, fe)
            if edited_any:
                bx, by = trace_points(first, step, c.shape[0], t0, t1, width,
                                      lambda a, b: c[a:b])
            else:
                bx, by = np.zeros(0), np.zeros(0)
        else:
            n, step = pictures.n, 1.0 / pictures.rate
            fe = fo = None
            if model is not None:
                fe = lambda a, b: model.band_component_span(channel, key, a, b, True)  # noqa: E731
                fo = lambda a, b: model.band_component_span(channel, key, a, b, False)  # noqa: E731
            env, unit = pictures.band_envelope(key), pictures.unit.get(key)
            if env is None or unit is None:
                # Still being made: without it only a zoomed view is drawn (from the
                # samples in view); a wide one would synthesise the whole band here.
                span = (t1 - t0) * pictures.rate
                if span > 2 * pictures.block * width:
                    fe = fo = None
            xs, ys = trace_points(0.0, step, n, t0, t1, width, fe, env)
            if edited_any:
                bx, by = trace_points(0.0, step, n, t0, t1, width, fo, unit)
            else:
                bx, by = np.zeros(0), np.zeros(0)
            pending = fe is None and env is None
        self.curve.setData(xs, ys)
        self.base.setData(bx, by)
        peak = 0.0
        for arr in (ys, by):
            if arr.size:
                peak = max(peak, float(np.max(np.abs(arr))))
        lam = self.threshold_value if mode == "coefficients" else None
        if lam is not None and math.isfinite(lam):
            self.thr_hi.setPos(lam)
            self.thr_lo.setPos(-lam)
            self.thr_hi.show()
            self.thr_lo.show()
            peak = max(peak, lam)
        else:
            self.thr_hi.hide()
            self.thr_lo.hide()
        top = peak * 1.08 if peak > 0 else 1.0
        self.plot.getViewBox().setYRange(-top, top, padding=0)
        label = f"±{short_number(peak)}"
        if mode != "coefficients" and pending:
            label = "drawing…"
        if self.threshold_value is not None:
            label += f"\nλ {short_number(self.threshold_value)}"
        self.scale_label.setText(label)


class BandsPane(QFrame):
    """All bands of the current channel, finest on top, with their controls."""

    editMade = Signal()

    def __init__(self, adapter, time_axis, parent=None):
        super().__init__(parent)
        self.setObjectName("pane")
        self.adapter = adapter
        self.axis = time_axis
        self.channel = 0
        self.rows: dict = {}
        self.scrollbar_width = self.style().pixelMetric(QStyle.PixelMetric.PM_ScrollBarExtent)
        outer = QVBoxLayout(self)
        outer.setContentsMargins(0, 0, 0, 0)
        outer.setSpacing(0)
        head = QWidget()
        head.setObjectName("gutter")
        h = QHBoxLayout(head)
        h.setContentsMargins(8, 4, 8, 4)
        title = QLabel("Bands")
        title.setObjectName("paneTitle")
        title.setFixedWidth(GUTTER_WIDTH - 16)
        h.addWidget(title)
        h.addWidget(QLabel("Show"))
        self.mode = QComboBox()
        self.mode.addItem("time component", "component")
        self.mode.addItem("coefficients (with threshold)", "coefficients")
        self.mode.setToolTip("each band's part of the signal, or its wavelet coefficients with "
                             "the threshold drawn as ±λ")
        h.addWidget(self.mode)
        self.all_button = QToolButton()
        self.all_button.setText("threshold all details")
        self.all_button.setPopupMode(QToolButton.ToolButtonPopupMode.InstantPopup)
        menu = QMenu(self.all_button)
        for label, rule, shape in ALL_DETAILS:
            act = menu.addAction(label)
            act.triggered.connect(lambda _=False, r=rule, s=shape: self.threshold_all(r, s))
        self.all_button.setMenu(menu)
        self.all_button.setToolTip("add one threshold edit over every detail level")
        h.addWidget(self.all_button)
        hint = QLabel("grey: as read · blue: as edited · dashed: threshold ±λ")
        hint.setObjectName("hint")
        # The hint gives way when the pane is narrow; it must not widen the window.
        hint.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        hint.setAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
        h.addWidget(hint, 1)
        outer.addWidget(head)
        self.scroll = QScrollArea()
        self.scroll.setWidgetResizable(True)
        self.scroll.setFrameShape(QFrame.Shape.NoFrame)
        self.scroll.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        # Always there, so the rows keep the width that lines them up with the other panes.
        self.scroll.setVerticalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOn)
        self.body = QWidget()
        self.body_layout = QVBoxLayout(self.body)
        self.body_layout.setContentsMargins(0, 0, 0, 0)
        self.body_layout.setSpacing(0)
        self.scroll.setWidget(self.body)
        outer.addWidget(self.scroll, 1)
        self.mode.currentIndexChanged.connect(lambda _: self.redraw())
        self.axis.rangeChanged.connect(self._schedule)
        self._timer = QTimer(self)
        self._timer.setSingleShot(True)
        self._timer.setInterval(0)
        self._timer.timeout.connect(self.redraw)
        # Rows are built one per turn of the event loop (a row's plot takes tens
        # of milliseconds to make): the window stays responsive while they come.
        self._to_build: list = []
        self._build_timer = QTimer(self)
        self._build_timer.setSingleShot(True)
        self._build_timer.setInterval(0)
        self._build_timer.timeout.connect(self._build_next_row)
        adapter.add_pending_check(self.rows_pending)
        adapter.modelReplaced.connect(self._on_model)
        adapter.bandsKnown.connect(self._ensure_rows)
        adapter.recipeChanged.connect(self._on_recipe)
        adapter.bandDrawn.connect(self._band_drawn)
        adapter.figuresKnown.connect(lambda channel: self._sync_controls())
        adapter.busyChanged.connect(lambda busy: self.setEnabled(not busy))

    def sizeHint(self):
        hint = super().sizeHint()
        hint.setHeight(ROW_HEIGHT * 12 + AXIS_HEIGHT + 32)
        return hint

    # ------------------------------------------------------------- building

    def set_channel(self, channel: int) -> None:
        self.channel = channel
        self._sync_controls()
        self.redraw()

    def _ensure_rows(self, keys) -> None:
        """One row per band, finest first (kept when the bands stay the same).

        The rows are made one per turn of the event loop, in order.
        """
        keys = list(keys)
        if list(self.rows) + [key for _, key in self._to_build] == keys:
            return
        for row in self.rows.values():
            self.axis.unlink(row.plot.getViewBox())
            row.setParent(None)
            row.deleteLater()
        self.rows = {}
        while self.body_layout.count():
            self.body_layout.takeAt(0)
        self.body_layout.addStretch(1)
        self._to_build = [(i == len(keys) - 1, key) for i, key in enumerate(keys)]
        self._build_timer.start()

    def rows_pending(self) -> bool:
        """Band rows are still being made."""
        return bool(self._to_build)

    def _build_next_row(self) -> None:
        if not self._to_build:
            return
        last, key = self._to_build.pop(0)
        row = BandRow(self, key, last=last)
        self.body_layout.insertWidget(self.body_layout.count() - 1, row)   # before the stretch
        self.rows[key] = row
        self._fit_rows()
        m = self.adapter.model
        pic = self.adapter.pictures(self.channel)
        if m is not None and pic is not None and key in pic.keys:
            row.show_state(m, pic, self.channel)
            row.draw(m, pic, self.channel, self.mode.currentData(), self.axis.t0, self.axis.t1)
        if self._to_build:
            self._build_timer.start()

    def _on_model(self) -> None:
        m = self.adapter.model
        if m is None:
            return
        if self.channel >= m.recording.channels:
            self.channel = 0
        self._ensure_rows(m.band_keys)
        self._sync_controls()
        self.redraw()

    def _fit_rows(self) -> None:
        """Share the visible height among the rows (scroll only when they do not fit)."""
        if not self.rows:
            return
        room = self.scroll.viewport().height() - AXIS_HEIGHT
        # shared among the rows still to come too: rows keep their height as they arrive
        count = len(self.rows) + len(self._to_build)
        h = int(max(ROW_MIN, min(ROW_MAX, room // count)))
        for row in self.rows.values():
            row.set_row_height(h)

    def resizeEvent(self, ev):
        super().resizeEvent(ev)
        self._fit_rows()

    def _on_recipe(self, change) -> None:
        self._sync_controls()
        if self.channel in change.channels:
            m = self.adapter.model
            pic = self.adapter.pictures(self.channel)
            mode = self.mode.currentData()
            for key in change.bands:
                if key in self.rows and m is not None and pic is not None:
                    self.rows[key].draw(m, pic, self.channel, mode, self.axis.t0, self.axis.t1)
            if mode == "coefficients":
                self.redraw()

    def _band_drawn(self, channel: int, key) -> None:
        """A band's envelope came from the background: draw its row."""
        if channel != self.channel or key not in self.rows:
            return
        pic = self.adapter.pictures(self.channel)
        if pic is not None:
            self.rows[key].draw(self.adapter.model, pic, self.channel, self.mode.currentData(),
                                self.axis.t0, self.axis.t1)

    def _sync_controls(self) -> None:
        m = self.adapter.model
        pic = self.adapter.pictures(self.channel)
        if m is None or pic is None:
            return
        for row in self.rows.values():
            row.show_state(m, pic, self.channel)

    def _schedule(self, *_):
        self._timer.start()

    def redraw(self) -> None:
        m = self.adapter.model
        pic = self.adapter.pictures(self.channel)
        if pic is None:
            return
        mode = self.mode.currentData()
        for row in self.rows.values():
            row.draw(m, pic, self.channel, mode, self.axis.t0, self.axis.t1)

    def showEvent(self, ev):
        super().showEvent(ev)
        self._schedule()

    # ---------------------------------------------------------------- edits

    def set_band_gain(self, key, gain: float, scope) -> None:
        """Make, change or drop the band's own gain edit."""
        edits = self.adapter.edits
        i, e = own_edit(edits, "gain", key, scope)
        ok = True
        if e is None:
            if gain != 1.0:
                ok = self.adapter.add_edit(Edit("gain", levels=(key,), gain=gain, channels=scope))
        elif gain == 1.0 and e.enabled:
            ok = self.adapter.remove_edit(i)
        else:
            ok = self.adapter.replace_edit(i, replace(e, gain=gain, enabled=True))
        if not ok:
            self._sync_controls()      # the controls go back to what the recipe says
        self.editMade.emit()

    def set_band_threshold(self, key, values: dict, scope) -> None:
        """Make, change or drop the band's own threshold edit."""
        edits = self.adapter.edits
        i, e = own_edit(edits, "threshold", key, scope)
        ok = True
        if values["rule"] == "off":
            if e is not None:
                ok = self.adapter.remove_edit(i)
        else:
            kw = dict(rule=values["rule"], shape=values["shape"], noise=values["noise"],
                      scale=values["scale"],
                      value=values["value"] if values["rule"] == "manual" else None)
            if e is None:
                ok = self.adapter.add_edit(Edit("threshold", levels=(key,), channels=scope, **kw))
            else:
                ok = self.adapter.replace_edit(i, replace(e, enabled=True, **kw))
        if not ok:
            self._sync_controls()
        self.editMade.emit()

    def threshold_all(self, rule: str, shape: str) -> None:
        scope = self.adapter.edit_channels(self.channel)
        self.adapter.add_edit(Edit("threshold", levels="details", rule=rule, shape=shape,
                                   channels=scope))
        self.editMade.emit()
