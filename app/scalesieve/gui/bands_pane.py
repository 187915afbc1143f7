"""Band lanes: the drawer below the Scale map with the traces of the bands opened.

A lane shows a band's trace as edited and, lighter, what the recipe removed
from it; for a thresholded band, the spread of its |c|/σ with the cut shaded.
The band's controls live in its row header on the map (``row_headers``); the
lanes open and close from there or from the lane's own close button.
"""

from __future__ import annotations

import html

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QSize, Qt, QTimer, Signal
from PySide6.QtWidgets import (QComboBox, QFrame, QHBoxLayout, QLabel, QScrollArea,
                               QStyle, QToolButton, QVBoxLayout, QWidget)

from scalesieve.views.band_edits import (ALL_DETAILS, edits_on_band, own_edit,  # noqa: F401
                                       set_band_gain, set_band_threshold)
from scalesieve.views.band_labels import hz_range
from scalesieve.views.decimate import trace_points
from scalesieve.views.edit_words import edit_text
from scalesieve.gui.elided_label import ElidedLabel
from scalesieve.gui.pane_frame import AXIS_WIDTH, GUTTER_WIDTH, RIGHT_MARGIN, make_plot
from scalesieve.gui.resource_files import colour
from scalesieve.gui.scale_map import first_and_step
from scalesieve.gui.threshold_spread import ThresholdSpread
from scalesieve.gui.event_guard import reported

ROW_HEIGHT = 90
#: opacity (of 255) of the removed trace beneath a lane's as-edited one
REMOVED_ALPHA = 110
#: open lanes share the drawer's height within these bounds (scrolling beyond)
ROW_MIN, ROW_MAX = 84, 180
AXIS_HEIGHT = 30
#: up to this many samples the removed part of a band is synthesised for any view;
#: beyond, only for a zoomed view (a wide one would synthesise the whole band)
EXACT_REMOVED_UPTO = 1 << 21
GAIN_RANGE_DB = (-60.0, 24.0)
def short_number(v: float) -> str:
    """Two significant digits, without exponents for the usual sizes (fits the margin)."""
    a = abs(v)
    if a >= 100:
        return f"{v:.0f}"
    if a >= 1e-4 or a == 0:
        return f"{v:.2g}"
    return f"{v:.1e}"


class BandRow(QWidget):
    """One lane: a band's trace, what was removed from it, and its threshold's spread."""

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
        controls.setFixedWidth(GUTTER_WIDTH + AXIS_WIDTH)
        c = QVBoxLayout(controls)
        c.setContentsMargins(8, 2, 6, 2 + (AXIS_HEIGHT if last else 0))
        c.setSpacing(1)
        top = QHBoxLayout()
        self.info = QLabel("")
        self.info.setObjectName("bandInfo")
        self.info.setTextFormat(Qt.TextFormat.RichText)
        self.close_button = QToolButton()
        self.close_button.setObjectName("laneClose")
        self.close_button.setText("close")
        self.close_button.setToolTip("close this lane (the band's trace)")
        self.close_button.clicked.connect(lambda: pane.set_lane(key, False))
        top.addWidget(self.info, 1)
        top.addWidget(self.close_button)
        c.addLayout(top)
        self.spread = ThresholdSpread()
        self.spread.hide()
        self.spread_caption = QLabel("")
        self.spread_caption.setObjectName("bandInfo")
        self.spread_caption.hide()
        c.addWidget(self.spread_caption)
        c.addWidget(self.spread, 1)
        c.addStretch(0)
        row.addWidget(controls)

        self.plot = make_plot(bottom_axis=last, left_axis=False)
        self.plot.getPlotItem().layout.setColumnFixedWidth(0, 0)
        self.plot.setFixedHeight(ROW_HEIGHT + (AXIS_HEIGHT if last else 0))
        vb = self.plot.getViewBox()
        # what was removed, lighter and beneath: the as-edited trace shows through it
        # (as the Reconstruction draws cleaned over a lighter original)
        light = pg.mkColor(colour("traces", "removed"))
        light.setAlpha(REMOVED_ALPHA)
        self.base = pg.PlotDataItem(pen=pg.mkPen(light, width=1),
                                    connect="all", skipFiniteCheck=True)
        self.curve = pg.PlotDataItem(pen=pg.mkPen(colour("traces", "band"), width=1),
                                     connect="all", skipFiniteCheck=True)
        self.base.setZValue(1)
        self.curve.setZValue(2)
        for it in (self.base, self.curve):
            self.plot.addItem(it)
        row.addWidget(self.plot, 1)
        # The band's scale sits in the right margin, off the trace.
        self.scale_label = QLabel("")
        self.scale_label.setObjectName("bandInfo")
        self.scale_label.setFixedWidth(RIGHT_MARGIN - pane.scrollbar_width)
        self.scale_label.setAlignment(Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignTop)
        self.scale_label.setContentsMargins(4, 3, 0, 0)
        row.addWidget(self.scale_label)
        pane.axis.link(vb)
        self.threshold_value: float | None = None
        self._spread_for = None

    def set_row_height(self, h: int) -> None:
        total = h + (AXIS_HEIGHT if self.last else 0)
        self.setFixedHeight(total)
        self.plot.setFixedHeight(total)

    # ---------------------------------------------------------- from the model

    def show_state(self, model, pictures, channel: int) -> None:
        """Show the band's name, range and the recipe's say on it."""
        key = self.key
        lo, hi = model.band_range_hz(key)
        name = model.band_name(key)
        edits = model.edits
        touching = edits_on_band(edits, key, channel, model.spec)
        muted = model.band_gain(channel, key) == 0.0
        info = (f"<b>{hz_range(lo, hi)}</b>&nbsp; {html.escape(name)}"
                f"{' · muted' if muted else ''}")
        if info != self.info.text():
            self.info.setText(info)
        tip = [f"{name}: {hz_range(lo, hi)}; lighter: what the recipe removed from it"]
        tip += [f"edit {i + 1}: {edit_text(edits[i], model)}" for i in touching]
        self.info.setToolTip("\n".join(tip))
        self.setProperty("muted", muted)
        band_col = colour("traces", "band_muted") if muted else colour("traces", "band")
        self.curve.setPen(pg.mkPen(band_col, width=1))
        # The threshold shown is the last enabled one acting on this band.
        self.threshold_value = None
        thr = None
        for i in reversed(touching):
            if edits[i].op == "threshold":
                thr = edits[i]
                self.threshold_value = float(model.threshold_for(channel, key, thr))
                break
        if thr is None:
            self.spread.hide()
            self.spread_caption.hide()
            self._spread_for = None
            return
        sigma = float(model.noise_sigma(channel, key))
        tag = (id(model), channel, self.threshold_value, sigma)
        if tag != self._spread_for and self.isVisible():
            self.spread.show_band(model.coefficients(channel, key), sigma, self.threshold_value)
            self._spread_for = tag
            self.spread_caption.setText(self.spread.caption())
        self.spread.show()
        self.spread_caption.show()

    # --------------------------------------------------------------- drawing

    def draw(self, model, pictures, channel: int, mode: str, t0: float, t1: float) -> None:
        if not self.isVisible() and not self.pane.lane_open(self.key):
            return
        width = max(50, int(self.plot.getViewBox().width()))
        key = self.key
        edited_any = pictures.band_is_edited(key)
        pending = False
        bx, by = np.zeros(0), np.zeros(0)
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
                                      lambda a, b: c[a:b] - fe(a, b))
        else:
            n, step = pictures.n, 1.0 / pictures.rate
            fe = fo = None
            if model is not None:
                fe = lambda a, b: model.band_component_span(channel, key, a, b, True)  # noqa: E731
                fo = lambda a, b: model.band_component_span(channel, key, a, b, False)  # noqa: E731
            env, unit = pictures.band_envelope(key), pictures.unit.get(key)
            span = (t1 - t0) * pictures.rate
            wide = span > 2 * pictures.block * width
            if (env is None or unit is None) and wide and n > EXACT_REMOVED_UPTO:
                # Still being made: without it only a zoomed view of a long recording
                # is drawn (from the samples in view); a wide one would synthesise
                # the whole band here.
                fe = fo = None
            xs, ys = trace_points(0.0, step, n, t0, t1, width, fe, env)
            if edited_any:
                g = model.band_gain(channel, key) if model is not None else None
                if g is not None and unit is not None:
                    # a plain gain removes (1 − g) of the band as read
                    bx, by = trace_points(0.0, step, n, t0, t1, width,
                                          None if fo is None else
                                          (lambda a, b: fo(a, b) * (1.0 - g)), unit)
                    if fo is None or wide:
                        by = by * (1.0 - g)
                elif fo is not None and fe is not None and (not wide or n <= EXACT_REMOVED_UPTO):
                    bx, by = trace_points(0.0, step, n, t0, t1, width,
                                          lambda a, b: fo(a, b) - fe(a, b))
            pending = fe is None and env is None
        self.curve.setData(xs, ys)
        self.base.setData(bx, by)
        peak = 0.0
        for arr in (ys, by):
            if arr.size:
                peak = max(peak, float(np.max(np.abs(arr))))
        top = peak * 1.08 if peak > 0 else 1.0
        self.plot.getViewBox().setYRange(-top, top, padding=0)
        label = f"±{short_number(peak)}"
        if mode != "coefficients" and pending:
            label = "drawing…"
        if self.threshold_value is not None:
            label += f"\nλ {short_number(self.threshold_value)}"
        self.scale_label.setText(label)


class BandsPane(QFrame):
    """The drawer of lanes below the Scale map: the traces of the bands opened."""

    editMade = Signal()
    laneToggled = Signal(object, bool)      # band key, open

    def __init__(self, adapter, time_axis, parent=None):
        super().__init__(parent)
        self.setObjectName("pane")
        self.adapter = adapter
        self.axis = time_axis
        self.channel = 0
        self.rows: dict = {}             # band key -> its lane's row, made when first opened
        self.band_keys: list = []        # the bands lanes may open for
        self.open_keys: list = []
        self._defaults_for = None
        self.impulsive_note: str | None = None   # why no lane opened for an impulsive band
        from scalesieve.gui.background_run import BackgroundRun

        # the most impulsive band reads every band's coefficients: not in the window's thread
        self._defaults_run = BackgroundRun("default lanes", self)
        self._defaults_run.finished.connect(self._defaults_found)
        adapter.add_pending_check(lambda: self._defaults_run.busy)
        self.scrollbar_width = self.style().pixelMetric(QStyle.PixelMetric.PM_ScrollBarExtent)
        outer = QVBoxLayout(self)
        outer.setContentsMargins(0, 0, 0, 0)
        outer.setSpacing(0)
        head = QWidget()
        head.setObjectName("gutter")
        h = QHBoxLayout(head)
        h.setContentsMargins(8, 4, 8, 4)
        title = QLabel("Band lanes")
        title.setObjectName("paneTitle")
        h.addWidget(title)
        h.addWidget(QLabel("Show"))
        self.mode = QComboBox()
        self.mode.addItem("time component", "component")
        self.mode.addItem("coefficients", "coefficients")
        self.mode.setToolTip("each open band's part of the signal, or its wavelet coefficients")
        h.addWidget(self.mode)
        # (how to open a lane is said while none is open, by self.empty)
        hint = ElidedLabel("dark: as edited · light orange, beneath: removed from the band")
        hint.setObjectName("hint")
        # The hint gives way when the pane is narrow; it must not widen the window.
        hint.setAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
        self.hint = hint
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
        self.empty = QLabel("No lanes open: a row's “trace” button on the Scale map opens "
                            "that band here.", self)
        self.empty.setObjectName("hint")
        self.empty.setAlignment(Qt.AlignmentFlag.AlignCenter)
        outer.addWidget(self.empty)
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

    @reported(fallback=QSize(), once=True)   # an invalid size: no hint
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
        """The bands lanes may open for, finest first (kept when the bands stay the same).

        A lane's row is made when the lane first opens: a row's plot takes tens of
        milliseconds to make, and 64 packet bands' rows made up front held the
        window for seconds while the recording opened.  Rows of lanes still open
        are made one per turn of the event loop, in order.
        """
        keys = list(keys)
        if keys == self.band_keys:
            return
        for row in self.rows.values():
            self.axis.unlink(row.plot.getViewBox())
            row.setParent(None)
            row.deleteLater()
        self.rows = {}
        while self.body_layout.count():
            self.body_layout.takeAt(0)
        self.body_layout.addStretch(1)
        self.band_keys = keys
        self._to_build = [key for key in keys if key in self.open_keys]
        if self._to_build:
            self._build_timer.start()

    def rows_pending(self) -> bool:
        """Rows of open lanes are still being made."""
        return bool(self._to_build)

    def _build_next_row(self) -> None:
        if not self._to_build:
            return
        key = self._to_build.pop(0)
        if key not in self.rows:
            self._make_row(key)
        if self._to_build:
            self._build_timer.start()

    def _make_row(self, key) -> "BandRow":
        """The row of one band's lane, put in its place among the rows made so far."""
        keys = self.band_keys
        row = BandRow(self, key, last=key == keys[-1])
        row.setVisible(key in self.open_keys)
        place = keys.index(key)
        at = sum(1 for k in self.rows if keys.index(k) < place)
        self.body_layout.insertWidget(at, row)              # before the stretch
        self.rows[key] = row
        self.rows = {k: self.rows[k] for k in keys if k in self.rows}   # in band order
        self._fit_rows()
        m = self.adapter.model
        pic = self.adapter.pictures(self.channel)
        if m is not None and pic is not None and key in pic.keys and key in self.open_keys:
            row.show_state(m, pic, self.channel)
            row.draw(m, pic, self.channel, self.mode.currentData(), self.axis.t0, self.axis.t1)
        return row

    def _on_model(self) -> None:
        m = self.adapter.model
        if m is None:
            return
        if self.channel >= m.recording.channels:
            self.channel = 0
        self._ensure_rows(m.band_keys)
        self.adapter.want_envelopes(self.open_keys)
        self._sync_controls()
        self.redraw()

    def _fit_rows(self) -> None:
        """Share the drawer's height among the open lanes (scroll only when they do not fit)."""
        self.empty.setVisible(not self.open_keys)
        if not self.rows:
            return
        room = self.scroll.viewport().height() - AXIS_HEIGHT
        count = max(1, len(self.open_keys))
        h = int(max(ROW_MIN, min(ROW_MAX, room // count)))
        for row in self.rows.values():
            row.set_row_height(h)

    # ---------------------------------------------------------------- lanes

    def lane_open(self, key) -> bool:
        return key in self.open_keys

    def set_lane(self, key, on: bool, later: bool = False) -> None:
        """Open or close a band's lane; ``later``: a row not yet made comes in a later
        turn of the event loop (as the rows of lanes left open do)."""
        if on == (key in self.open_keys):
            return
        m = self.adapter.model
        if on:
            self.adapter.want_envelopes([key])
            self.open_keys.append(key)
            order = list(m.band_keys) if m is not None else list(self.rows)
            self.open_keys.sort(key=lambda k: order.index(k) if k in order else 0)
        else:
            self.open_keys.remove(key)
        row = self.rows.get(key)
        if row is None and on and key in self.band_keys:
            if later:
                if key not in self._to_build:
                    self._to_build.append(key)
                self._build_timer.start()
            else:
                row = self._make_row(key)
        if row is not None:
            row.setVisible(on)
            if on:
                pic = self.adapter.pictures(self.channel)
                if m is not None and pic is not None:
                    row.show_state(m, pic, self.channel)
                    row.draw(m, pic, self.channel, self.mode.currentData(), self.axis.t0,
                             self.axis.t1)
        self._fit_rows()
        self.laneToggled.emit(key, on)

    def open_default_lanes(self, table: dict) -> None:
        """Open the most impulsive band and the one with the largest share (once per model).

        The most impulsive band is found in a worker thread; the lanes open when it is.
        """
        m = self.adapter.model
        tag = (id(m), self.channel)
        if m is None or tag == self._defaults_for or not table:
            return
        self._defaults_for = tag
        details = {k: r for k, r in table.items() if k != "a"} or table
        largest = max(table, key=lambda k: table[k]["energy_fraction"])
        channel = self.channel
        self._defaults_run.request((tag, largest),
                                   lambda check: _most_impulsive_key(m, channel, details))

    def _defaults_found(self, job, found, problem) -> None:
        tag, largest = job
        m = self.adapter.model
        if m is None or tag != (id(m), self.channel):
            return                         # another recording or channel meanwhile
        impulsive, self.impulsive_note = found if problem is None else (None, None)
        for key in list(self.open_keys):
            self.set_lane(key, False)
        for key in (impulsive, largest):
            if key is not None:
                self.set_lane(key, True, later=True)   # the window answers between rows
        if self.impulsive_note:
            try:
                self.window().statusBar().showMessage(self.impulsive_note, 10000)
            except (AttributeError, RuntimeError):
                pass

    @reported(once=True)
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
                if key in self.rows and key in self.open_keys and m is not None \
                        and pic is not None:
                    self.rows[key].draw(m, pic, self.channel, mode, self.axis.t0, self.axis.t1)
            if mode == "coefficients":
                self.redraw()

    def _band_drawn(self, channel: int, key) -> None:
        """A band's envelope came from the background: draw its row."""
        if channel != self.channel or key not in self.rows or key not in self.open_keys:
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
        for key in self.open_keys:
            if key in self.rows:
                self.rows[key].show_state(m, pic, self.channel)

    def _schedule(self, *_):
        self._timer.start()

    def redraw(self) -> None:
        m = self.adapter.model
        pic = self.adapter.pictures(self.channel)
        if pic is None:
            return
        mode = self.mode.currentData()
        for key in self.open_keys:
            if key in self.rows:
                self.rows[key].draw(m, pic, self.channel, mode, self.axis.t0, self.axis.t1)

    @reported
    def showEvent(self, ev):
        super().showEvent(ev)
        self._schedule()

    # ---------------------------------------------------------------- edits

    def set_band_gain(self, key, gain: float, scope) -> None:
        """Make, change or drop the band's own gain edit."""
        if not set_band_gain(self.adapter, key, gain, scope):
            self._sync_controls()
        self.editMade.emit()

    def set_band_threshold(self, key, values: dict, scope) -> None:
        """Make, change or drop the band's own threshold edit."""
        if not set_band_threshold(self.adapter, key, values, scope):
            self._sync_controls()
        self.editMade.emit()


def _most_impulsive_key(m, channel: int, details: dict):
    """``(the band with the largest interior kurtosis or None, a note or None)``.

    Interior: the coefficients the boundary extension leaves alone; a band
    with too few of them takes no part.  When none qualifies (a short
    recording) the largest kurtosis of all coefficients decides.  A band whose
    kurtosis does not stand out of Gaussian noise (``band_choice.is_impulsive``,
    all bands compared together) is no answer: the note says so instead.
    """
    import pywt

    from scalesieve.core import band_choice

    spec = m.spec
    L = pywt.Wavelet(spec.wavelet).dec_len
    n = m.recording.n
    if spec.kind == "packet":
        depth = max(getattr(k, "depth", 1) for k in details)
        edges = band_choice.dwt_edges(n, L, depth)
    else:
        edges = band_choice.dwt_edges(n, L, spec.level)

    def level_of(key):
        if hasattr(key, "path"):
            return key.depth
        return spec.level if key == "a" else int(key)

    counts: dict = {}        # interior coefficients of each band
    sizes: dict = {}         # all its coefficients

    def inner(key):
        try:
            c = m.coefficients(channel, key)
        except Exception:  # the model changed under it
            return None
        sizes[key] = int(np.shape(c)[0])
        j = level_of(key)
        if spec.kind == "swt":
            e = band_choice.swt_edge(L, j)   # and the padding up to a multiple of 2^J
            right = e + max(0, c.shape[0] - n)
        else:
            e, right = edges[j - 1]
        counts[key] = int(band_choice.interior(c, e, right).shape[0])
        return band_choice.interior_kurtosis(c, e, right)

    figures = {k: inner(k) for k in details}
    key = band_choice.most_impulsive(figures.items())
    kurt = figures.get(key)
    if key is None:
        key = max(details, key=lambda k: details[k]["kurtosis"]
                  if details[k]["kurtosis"] is not None else -1.0)
        kurt = details[key]["kurtosis"]
        counts[key] = sizes.get(key, 0)
    if band_choice.is_impulsive(kurt, counts.get(key, 0), bands=len(details)):
        return key, None
    return None, ("No band stands out as impulsive (the largest kurtosis is within what "
                  "Gaussian noise gives), so no lane opens for one.")
