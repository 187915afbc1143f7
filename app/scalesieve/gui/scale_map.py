"""Scale map: coefficient magnitude by level (rows, finest on top) and time.

Each row is one band of the current channel, decimated to the screen: a
pixel column shows the largest ``|c|`` of the coefficients whose time falls
in it.  Dragging a rectangle over times and levels makes a region edit;
region edits are drawn as outlines that can be selected, moved, resized,
changed (context menu) and removed (Delete key).
"""

from __future__ import annotations

import math
import threading

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QRectF, Qt, QTimer, Signal
from PySide6.QtWidgets import (QCheckBox, QComboBox, QDoubleSpinBox, QFrame,
                               QHBoxLayout, QLabel, QMenu,
                               QSizePolicy, QToolButton, QVBoxLayout, QWidget, QWidgetAction)

from scalesieve.core import transforms as tf
from scalesieve.views.band_edits import (ALL_DETAILS, edits_on_band, own_edit, set_band_gain,
                                       set_band_threshold)
from scalesieve.views.band_labels import format_seconds, hz_range
from scalesieve.views.decimate import maxabs_columns, maxabs_columns_from_blocks
from scalesieve.views.edit_words import edit_text
from scalesieve.gui.pane_frame import (AXIS_WIDTH, GUTTER_WIDTH, RIGHT_MARGIN,
                                       make_plot, tick_font)
from scalesieve.gui.map_scroll import RowScroll
from scalesieve.gui.map_regions import (MapRegions, MapViewBox,  # noqa: F401
                                        RegionOutline, contiguous_runs)
from scalesieve.gui.resource_files import colour, palette
from scalesieve.views.thread_priority import lower_this_thread
from scalesieve.gui.row_headers import GAIN_MIN_DB, GAIN_MAX_DB, MUTE_TEXT, RowHeader, RowHeaderColumn
from scalesieve.gui.threshold_form import RULE_TIPS, ThresholdForm
from scalesieve.gui.transform_line import TransformLine
from scalesieve.recipe import Edit
from scalesieve.gui.event_guard import reported
from scalesieve.gui.thread_results import post

#: shown dynamic range in dB below the reference magnitude
DB_RANGE = 60.0
#: bands of at least this many coefficients are drawn zoomed out from their block peaks
PEAKS_FROM = 1 << 22
_TINY = 1e-300


def first_and_step(model, key) -> tuple[float, float]:
    """Time of a band's first coefficient and the time between coefficients (seconds).

    Coefficient times are evenly spaced, so two of them tell all (the whole
    array would be as long as the band).
    """
    count = model.coefficients(0, key).shape[0]
    rate = model.recording.rate
    t = tf.coefficient_positions(key, model.spec, min(count, 2)) / rate
    step = float(t[1] - t[0]) if t.shape[0] > 1 else 1.0 / rate
    return (float(t[0]) if t.shape[0] else 0.0), step


def _signed(v: float) -> str:
    v = float(v)
    return "0" if v == 0 else f"{v:+.4g}"


class ScaleMapPane(MapRegions, QFrame):
    """The Scale map of the current channel: the workbench.

    Rows are bands (finest on top); each row's header at the left edge
    carries its controls; selected rows are the bands the edit buttons of the
    line above the map act on.
    """

    regionSelected = Signal(int)           # index of the edit in the recipe, -1: none
    readout = Signal(str)
    laneToggled = Signal(object, bool)     # band key, open
    rowsSelected = Signal(object)           # band keys
    figuresKnown = Signal(object)

    def __init__(self, adapter, time_axis, settings=None, parent=None):
        super().__init__(parent)
        self.setObjectName("pane")
        self.bar_widget = pg.GraphicsLayoutWidget()
        self.bar_widget.setBackground(colour("plot", "background"))
        self.bar_widget.ci.layout.setContentsMargins(0, 3, 0, 30)
        self.adapter = adapter
        self.axis = time_axis
        self.settings = settings
        self.channel = 0
        self.selected = -1
        self.keys: list = []
        self.selected_rows: list = []
        self._anchor = None
        self._table: dict = {}           # band key -> the model's band_table row
        self._table_for = None
        self._table_job = None
        self._orig_rows: dict = {}
        self._rows: dict = {}
        self._row_view = None
        self._ref = {}
        self._outlines: list[RegionOutline] = []
        self._building_outlines = False
        self._in_outline = False
        self._times: dict = {}
        self._region_db = GAIN_MIN_DB          # what the next drag's gain field starts at

        outer = QVBoxLayout(self)
        outer.setContentsMargins(0, 0, 0, 0)
        outer.setSpacing(0)
        self.top = QWidget()
        self.top.setObjectName("gutter")
        self.top_layout = QHBoxLayout(self.top)
        self.top_layout.setContentsMargins(8, 3, 8, 3)
        self.top_layout.setSpacing(6)
        outer.addWidget(self.top)
        body = QHBoxLayout()
        body.setContentsMargins(0, 0, 0, 0)
        body.setSpacing(0)
        self.row_scroll = RowScroll(body, self.bar_widget, RIGHT_MARGIN)   # many rows scroll
        outer.addWidget(self.row_scroll, 1)
        self.header_column = RowHeaderColumn()
        self.header_column.setObjectName("gutter")
        self.header_column.setAttribute(Qt.WidgetAttribute.WA_StyledBackground, True)
        self.header_column.setFixedWidth(GUTTER_WIDTH + AXIS_WIDTH)
        body.addWidget(self.header_column)
        self.content = QVBoxLayout()
        self.content.setContentsMargins(0, 0, 0, 0)
        body.addLayout(self.content, 1)
        self.bar_widget.setFixedWidth(RIGHT_MARGIN)
        body.addWidget(self.bar_widget)

        self.view = MapViewBox()
        self.view.invertY(True)
        self.plot = make_plot(self.view, left_axis=False)
        # The row headers take the place of the left axis (same width in every pane).
        self.plot.getPlotItem().layout.setColumnFixedWidth(0, 0)
        self.view.setMouseEnabled(x=True, y=False)
        self.plot.setToolTip("drag: a region edit (snapped to whole coefficient tiles) · "
                             "shift-drag: pan · wheel: zoom · Del: remove the selected region")
        self.empty_label = QLabel("No recording yet.\nOpen one with File ▸ Open recording… or "
                                  "drop a WAV, FLAC or text table on the window.")
        self.empty_label.setObjectName("emptyState")
        self.empty_label.setAlignment(Qt.AlignmentFlag.AlignCenter)
        self.empty_label.setWordWrap(True)
        self.content.addWidget(self.empty_label, 1)
        self.content.addWidget(self.plot, 1)
        self.plot.hide()
        self.image = pg.ImageItem(axisOrder="row-major")
        self.image.setZValue(0)
        self.plot.addItem(self.image)
        self.cross_v = pg.InfiniteLine(angle=90, movable=False,
                                       pen=pg.mkPen(colour("traces", "crosshair"), width=1,
                                                    style=Qt.PenStyle.DashLine))
        self.cross_h = pg.InfiniteLine(angle=0, movable=False,
                                       pen=pg.mkPen(colour("traces", "crosshair"), width=1,
                                                    style=Qt.PenStyle.DashLine))
        for line in (self.cross_v, self.cross_h):
            line.setZValue(30)
            line.hide()
            self.plot.addItem(line, ignoreBounds=True)

        self.bar = pg.ColorBarItem(values=(0, 1), width=12, interactive=True,
                                   colorMap=self._colour_map(), colorMapMenu=False,
                                   pen=colour("plot", "foreground"))
        self.bar.setImageItem(self.image)
        bar_axis = self.bar.getAxis("right")
        bar_axis.setStyle(tickFont=tick_font())
        bar_axis.setTextPen(pg.mkPen(colour("plot", "foreground")))
        bar_axis.setWidth(RIGHT_MARGIN - 30)
        self.bar_widget.addItem(self.bar)

        self._build_top()
        self.axis.link(self.view)
        self.axis.rangeChanged.connect(self._schedule)
        self.view.sigResized.connect(self._schedule)
        self.view.sigResized.connect(self._place_headers)
        self.view.rectangleDrawn.connect(self._rectangle_drawn)
        self.view.clicked.connect(self._clicked)
        self.view.hovered.connect(self._hovered)
        self._timer = QTimer(self)
        self._timer.setSingleShot(True)
        self._timer.setInterval(0)
        self._timer.timeout.connect(self.redraw)
        self._table_timer = QTimer(self)
        self._table_timer.setSingleShot(True)
        self._table_timer.setInterval(0)
        self._table_timer.timeout.connect(self._read_table)
        adapter.add_pending_check(self.table_pending)
        adapter.add_pending_check(self.header_column.filling)
        self.header_column.filled.connect(self._show_headers)   # the new ones
        adapter.modelReplaced.connect(self._on_model)
        adapter.recipeChanged.connect(self._on_recipe)
        self.setFocusPolicy(Qt.FocusPolicy.StrongFocus)

    # ------------------------------------------------------------- top line

    def _build_top(self) -> None:
        t = self.top_layout
        title = QLabel("Scale map")
        title.setObjectName("paneTitle")
        t.addWidget(title)
        self.transform_line = TransformLine()
        t.addWidget(self.transform_line)
        self.threshold_button = QToolButton()
        self.threshold_button.setObjectName("thresholdButton")
        self.threshold_button.setText("Threshold selection")
        self.threshold_button.setPopupMode(QToolButton.ToolButtonPopupMode.InstantPopup)
        self.threshold_button.setToolTip("threshold the bands of the selected rows (click a row "
                                         "header to select it; Ctrl adds, Shift extends)")
        menu = QMenu(self.threshold_button)
        self.form = ThresholdForm()
        act = QWidgetAction(menu)
        act.setDefaultWidget(self.form)
        menu.addAction(act)
        menu.aboutToShow.connect(self._show_selected_threshold)
        self.threshold_button.setMenu(menu)
        self.form.changed.connect(self._threshold_chosen)
        t.addWidget(self.threshold_button)
        self.all_button = QToolButton()
        self.all_button.setObjectName("menuButton")
        self.all_button.setText("Threshold all details")
        self.all_button.setPopupMode(QToolButton.ToolButtonPopupMode.InstantPopup)
        all_menu = QMenu(self.all_button)
        for label, rule, shape in ALL_DETAILS:
            a = all_menu.addAction(label)
            a.setToolTip(RULE_TIPS.get(rule, ""))
            a.triggered.connect(lambda _=False, r=rule, s=shape: self.threshold_all(r, s))
        all_menu.setToolTipsVisible(True)
        self.all_button.setMenu(all_menu)
        self.all_button.setToolTip("add one threshold edit over every detail band")
        t.addWidget(self.all_button)
        self.look_button = QToolButton()
        self.look_button.setObjectName("menuButton")
        self.look_button.setText("Colours")
        self.look_button.setPopupMode(QToolButton.ToolButtonPopupMode.InstantPopup)
        self.look_button.setToolTip("how magnitudes are coloured")
        look = QWidget()
        g = QVBoxLayout(look)
        g.setContentsMargins(8, 6, 8, 6)
        row = QHBoxLayout()
        self.scale_box = QComboBox()
        self.scale_box.addItems(["dB", "linear"])
        self.scale_box.setToolTip("colour is |c| in dB (60 dB shown) or linear")
        self.map_box = QComboBox()
        for m in palette()["colour_maps"]:
            self.map_box.addItem(m["label"], m["name"])
        self.map_box.setToolTip("perceptually uniform colour maps")
        row.addWidget(QLabel("Colour"))
        row.addWidget(self.scale_box)
        row.addWidget(self.map_box, 1)
        g.addLayout(row)
        self.edited_box = QCheckBox("show as edited")
        self.edited_box.setChecked(True)
        self.edited_box.setToolTip("colour the coefficients after the recipe (else as read)")
        self.per_level_box = QCheckBox("each level to its own peak")
        self.per_level_box.setToolTip("scale every row to its largest |c| instead of one scale")
        g.addWidget(self.edited_box)
        g.addWidget(self.per_level_box)
        look_menu = QMenu(self.look_button)
        la = QWidgetAction(look_menu)
        la.setDefaultWidget(look)
        look_menu.addAction(la)
        self.look_button.setMenu(look_menu)
        t.addWidget(self.look_button)
        self.readout_label = QLabel("")
        self.readout_label.setObjectName("readout")
        self.readout_label.setWordWrap(False)
        self.readout_label.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        self.readout_label.setAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
        t.addWidget(self.readout_label, 1)
        # after a drag: the region's one gain field
        self.region_gain = QDoubleSpinBox()
        self.region_gain.setRange(GAIN_MIN_DB, GAIN_MAX_DB)
        self.region_gain.setDecimals(1)
        self.region_gain.setSuffix(" dB")
        self.region_gain.setSpecialValueText(MUTE_TEXT)
        self.region_gain.setKeyboardTracking(False)
        self.region_gain.setToolTip("gain of the selected region in dB; −∞ mutes it")
        self.region_gain.valueChanged.connect(self._region_gain_changed)
        self.region_gain_label = QLabel("region gain")
        t.addWidget(self.region_gain_label)
        t.addWidget(self.region_gain)
        self._show_region_gain()
        if self.settings is not None:
            self.scale_box.setCurrentText(self.settings.value("map/scale", "dB"))
            i = self.map_box.findData(self.settings.value("map/colours",
                                                          palette()["default_colour_map"]))
            if i >= 0:
                self.map_box.setCurrentIndex(i)
        self.scale_box.currentTextChanged.connect(self._scale_changed)
        self.map_box.currentIndexChanged.connect(self._map_changed)
        self.edited_box.toggled.connect(lambda _: self._rebuild_rows())
        self.per_level_box.toggled.connect(lambda _: self._scale_changed())

    # ---------------------------------------------------------- row headers

    @property
    def headers(self) -> dict:
        return self.header_column.headers

    def _make_header(self, key) -> RowHeader:
        h = RowHeader(key)
        h.gainChosen.connect(self._header_gain)
        h.clicked.connect(self._header_clicked)
        h.laneToggled.connect(self.laneToggled)
        return h

    def _place_headers(self, *_) -> None:
        if not self.keys or not self.plot.isVisible():
            self.header_column.place(0, 0)
            return
        r = self.view.sceneBoundingRect()
        top = self.plot.mapFromScene(r.topLeft())
        top = self.plot.mapTo(self, top)
        top = self.header_column.mapFrom(self, top)
        self.header_column.place(top.y(), r.height() / len(self.keys))

    @reported(once=True)
    def resizeEvent(self, ev):
        super().resizeEvent(ev)
        QTimer.singleShot(0, self._place_headers)

    @reported
    def showEvent(self, ev):
        super().showEvent(ev)
        QTimer.singleShot(0, self._place_headers)

    def _read_table(self) -> None:
        """The band figures of the channel, from the model's one band table.

        The table reads every band once (at 10 M samples, seconds): it is made
        in a background thread at low priority, after the first paint, and the
        headers fill in when it comes.
        """
        m = self.adapter.model
        if m is None:
            return
        tag = (id(m), self.channel)
        if self._table_for == tag:
            self._show_headers()
            return
        if self._table_job == tag:
            return
        self._table_job = tag
        channel = self.channel

        def work():
            lower_this_thread()
            try:
                rows = m.band_table(channel)
            except Exception:  # the model changed under it: the next model asks again
                rows = None
            post(self._table_ready, tag, list(m.band_keys), rows)   # gui/thread_results.py

        threading.Thread(target=work, name="scalesieve-band-table", daemon=True).start()

    def table_pending(self) -> bool:
        """The band figures are still being made (or about to be)."""
        return self._table_job is not None or self._table_timer.isActive()

    def _table_ready(self, tag, keys, rows) -> None:
        if tag != self._table_job:
            return
        self._table_job = None
        m = self.adapter.model
        if rows is None or m is None or tag != (id(m), self.channel):
            if m is not None and tag != (id(m), self.channel):
                self._read_table()
            return
        self._table = dict(zip(keys, rows))
        self._table_for = tag
        self._show_headers()
        self.figuresKnown.emit(dict(self._table))

    def band_figures(self, key) -> dict | None:
        return self._table.get(key) if self._table_for == (id(self.adapter.model),
                                                           self.channel) else None

    def _show_headers(self, keys=None) -> None:
        m = self.adapter.model
        if m is None:
            return
        scope = self.adapter.edit_channels(self.channel)
        for key in self.headers if keys is None else keys:
            h = self.headers[key]
            lo, hi = m.band_range_hz(key)
            row = self.band_figures(key)
            h.show_band(m.band_name(key), lo, hi, row["energy_fraction"] if row else 0.0, row)
            _, g = own_edit(m.edits, "gain", key, scope)
            thr = [m.edits[i] for i in edits_on_band(m.edits, key, self.channel, m.spec)
                   if m.edits[i].op == "threshold"]
            h.show_gain(g.gain if g is not None and g.enabled else None,
                        "; ".join(edit_text(e, m) for e in thr) or None)
            h.set_selected(key in self.selected_rows)
        self.header_column.fit_text_columns()

    def _header_gain(self, key, gain: float) -> None:
        keys = self.selected_rows if key in self.selected_rows else [key]
        scope = self.adapter.edit_channels(self.channel)
        for k in keys:
            set_band_gain(self.adapter, k, gain, scope)
        self._show_headers()

    def _header_clicked(self, key, modifiers) -> None:
        ctrl = bool(modifiers & Qt.KeyboardModifier.ControlModifier)
        shift = bool(modifiers & Qt.KeyboardModifier.ShiftModifier)
        if shift and self._anchor in self.keys:
            a, b = sorted((self.keys.index(self._anchor), self.keys.index(key)))
            rows = self.keys[a:b + 1]
        elif ctrl:
            rows = [k for k in self.selected_rows if k != key]
            if key not in self.selected_rows:
                rows.append(key)
            self._anchor = key
        else:
            rows = [] if self.selected_rows == [key] else [key]
            self._anchor = key
        self.select_rows(rows)

    def select_rows(self, keys) -> None:
        """Select rows (bands) for the edit buttons; [] clears."""
        self.selected_rows = [k for k in self.keys if k in set(keys)]
        for k, h in self.headers.items():
            h.set_selected(k in self.selected_rows)
        m = self.adapter.model
        n = len(self.selected_rows)
        if n == 0:
            self.threshold_button.setText("Threshold selection")
        elif m is not None:
            names = ", ".join(m.band_name(k) for k in self.selected_rows)
            self.threshold_button.setText(f"Threshold {names}" if n <= 2
                                          else f"Threshold {n} rows")
        self.rowsSelected.emit(list(self.selected_rows))

    def _selection_edit(self):
        """Index and edit of the threshold edit on exactly the selected rows, if any."""
        if not self.selected_rows:
            return -1, None
        scope = self.adapter.edit_channels(self.channel)
        return own_edit(self.adapter.edits, "threshold", tuple(self.selected_rows), scope,
                        whole=True)

    def _show_selected_threshold(self) -> None:
        _, e = self._selection_edit()
        self.form.show_edit(e)
        self.form.setEnabled(bool(self.selected_rows))

    def _threshold_chosen(self, values: dict) -> None:
        if not self.selected_rows:
            return
        set_band_threshold(self.adapter, tuple(self.selected_rows), values,
                           self.adapter.edit_channels(self.channel))

    def threshold_all(self, rule: str, shape: str) -> None:
        scope = self.adapter.edit_channels(self.channel)
        self.adapter.add_edit(Edit("threshold", levels="details", rule=rule, shape=shape,
                                   channels=scope))

    def _colour_map(self):
        name = palette()["default_colour_map"]
        if hasattr(self, "map_box"):
            name = self.map_box.currentData() or name
        return pg.colormap.get(name)

    def _map_changed(self, *_):
        self.bar.setColorMap(self._colour_map())
        if self.settings is not None:
            self.settings.setValue("map/colours", self.map_box.currentData())

    def _scale_changed(self, *_):
        if self.settings is not None:
            self.settings.setValue("map/scale", self.scale_box.currentText())
        self._set_levels()
        self._paint()

    # ------------------------------------------------------------ model side

    def set_channel(self, channel: int) -> None:
        self.channel = channel
        self.selected = -1
        self._on_model()
        self._read_table()

    def _on_model(self) -> None:
        m = self.adapter.model
        if m is None:
            return
        if self.channel >= m.recording.channels:
            self.channel = 0
        keys = list(m.band_keys)                     # d1 .. dJ, a: finest on top
        if keys != self.keys:
            self.selected_rows = []
        self.keys = keys
        self.empty_label.hide()
        self.plot.show()
        self._times = {key: first_and_step(m, key) for key in self.keys}
        self._ref = {}
        pic = self.adapter.pictures(self.channel)
        for key in self.keys:
            if pic is not None and key in pic.coef_peaks:
                peaks = pic.coef_peaks[key][1]                # found in the worker
                self._ref[key] = float(peaks.max()) if peaks.size else 0.0
                continue
            c = m.coefficients(self.channel, key)
            self._ref[key] = float(max(c.max(), -c.min())) if c.size else 0.0
        self.header_column.set_keys(self.keys, self._make_header)
        self.row_scroll.fit_rows(len(self.keys))
        self.view.setLimits(yMin=0, yMax=len(self.keys))
        self.view.setYRange(0, len(self.keys), padding=0)
        self._row_view = None
        self._set_levels()
        self.redraw()
        self._draw_outlines()
        self._show_headers()
        self._place_headers()
        QTimer.singleShot(0, self._place_headers)
        # The band figures come after the first paint (they read every band once).
        self._table_timer.start()
        self.transform_line.show_spec(m.spec, m.recording.n)
        self._show_region_gain()

    def _on_recipe(self, change) -> None:
        m = self.adapter.model
        if m is None:
            return
        if (self.channel in change.channels and self.edited_box.isChecked()
                and self._row_view is not None):
            for key in change.bands:
                if not self._patch_row(m, key, change.span):
                    self._rows.pop(key, None)
            self._fill_rows(m)
            self._paint()
        if self.selected >= len(m.edits):
            self.selected = -1
        if self._in_outline:
            QTimer.singleShot(0, self._draw_outlines)
        else:
            self._draw_outlines()
        self._show_headers()
        self._show_region_gain()

    def _schedule(self, *_):
        self._timer.start()

    def _view_key(self):
        return (self.axis.t0, self.axis.t1, max(50, int(self.view.width())), self.channel)

    def redraw(self) -> None:
        m = self.adapter.model
        if m is None or not self.keys:
            return
        vk = self._view_key()
        if vk != self._row_view:
            self._row_view = vk
            self._orig_rows = {}
            self._rows = {}
        self._fill_rows(m)
        self._paint()

    def _rebuild_rows(self) -> None:
        self._rows = {}
        m = self.adapter.model
        if m is not None:
            self._fill_rows(m)
            self._paint()

    def _fill_rows(self, m) -> None:
        """Compute the rows not yet known for the current view."""
        t0, t1, width, ch = self._row_view
        edited = self.edited_box.isChecked()
        for key in self.keys:
            if key not in self._orig_rows:
                first, step = self._times[key]
                c = m.coefficients(ch, key)
                row = None
                pic = self.adapter.pictures(ch)
                if pic is not None and key in pic.coef_peaks and c.shape[0] >= PEAKS_FROM:
                    # a long band zoomed out: the per-block peaks made in the worker,
                    # not every value (a column's edges may move by under a block)
                    block, peaks = pic.coef_peaks[key]
                    row = maxabs_columns_from_blocks(peaks, block, c.shape[0], first, step,
                                                     t0, t1, width)
                self._orig_rows[key] = (maxabs_columns(c, first, step, t0, t1, width)
                                        if row is None else row)
            if key in self._rows:
                continue
            gain = m.band_gain(ch, key) if edited else 1.0
            if gain is not None:
                self._rows[key] = self._orig_rows[key] * abs(float(gain))
                continue
            # Only the coefficients in view are worked out (the model's cost follows them).
            first, step = self._times[key]
            count = m.coefficients(ch, key).shape[0]
            k0 = int(np.clip(np.floor((t0 - first) / step) - 1, 0, count))
            k1 = int(np.clip(np.ceil((t1 - first) / step) + 2, k0, count))
            values = m.edited_coefficients(ch, key, k0, k1)
            self._rows[key] = maxabs_columns(values, first + k0 * step, step, t0, t1, width)

    def _patch_row(self, m, key, span) -> bool:
        """Redo only the columns a local change reaches; False when the row must be redone."""
        if key not in self._rows or span is None or m.band_gain(self.channel, key) is not None:
            return False
        t0, t1, width, ch = self._row_view
        rate = m.recording.rate
        dt = (t1 - t0) / width
        c0 = int(np.clip(np.floor((span[0] / rate - t0) / dt) - 1, 0, width))
        c1 = int(np.clip(np.ceil((span[1] / rate - t0) / dt) + 1, 0, width))
        if c1 - c0 > width // 2:
            return False
        if c1 <= c0:
            return True            # the change lies outside the view
        first, step = self._times[key]
        a, b = t0 + c0 * dt, t0 + c1 * dt
        count = m.coefficients(ch, key).shape[0]
        k0 = int(np.clip(np.floor((a - first) / step) - 1, 0, count))
        k1 = int(np.clip(np.ceil((b - first) / step) + 2, k0, count))
        values = m.edited_coefficients(ch, key, k0, k1)
        row = self._rows[key].copy()
        row[c0:c1] = maxabs_columns(values, first + k0 * step, step, a, b, c1 - c0)
        self._rows[key] = row
        return True

    def map_image(self) -> np.ndarray:
        """The magnitudes on screen, one row per band (finest first), before colouring."""
        return np.vstack([self._rows[k] for k in self.keys]) if self._rows else np.zeros((0, 0))

    def _display(self, img: np.ndarray) -> np.ndarray:
        if self.per_level_box.isChecked():
            ref = np.array([max(self._ref.get(k, 0.0), _TINY) for k in self.keys])[:, None]
            img = img / ref
        if self.scale_box.currentText() == "dB":
            return 20.0 * np.log10(np.maximum(img, _TINY))
        return img

    def _set_levels(self) -> None:
        details = [v for k, v in self._ref.items() if k != "a"] or list(self._ref.values()) or [1]
        top = max(details) or 1.0
        per_level = self.per_level_box.isChecked()
        if per_level:
            top = 1.0
        if self.scale_box.currentText() == "dB":
            t = 20 * math.log10(top)
            self.bar.setLevels((t - DB_RANGE, t))
            label = "|c| dB re level peak" if per_level else "|c| dB"
        else:
            self.bar.setLevels((0.0, top))
            label = "|c| / level peak" if per_level else "|c|"
        self.bar.getAxis("right").setLabel(label)
        self.bar.getAxis("right").label.setFont(tick_font())

    def _paint(self) -> None:
        if not self._rows or self._row_view is None:
            return
        t0, t1, width, _ = self._row_view
        img = self._display(self.map_image()).astype(np.float32)
        lv = self.bar.levels()
        self.image.setImage(img, autoLevels=False, levels=lv)
        self.image.setRect(QRectF(t0, 0.0, t1 - t0, float(len(self.keys))))

    # --------------------------------------------------------------- regions

    def _clicked(self, t: float, y: float, button) -> None:
        self.setFocus()
        if button == Qt.MouseButton.LeftButton:
            self.select_edit(-1)

    # -------------------------------------------------------------- readout

    def _hovered(self, t: float, y: float) -> None:
        m = self.adapter.model
        if m is None or not self.keys or math.isnan(t) or not (0 <= y < len(self.keys)):
            self.cross_v.hide()
            self.cross_h.hide()
            return
        row = int(y)
        key = self.keys[row]
        self.cross_v.setPos(t)
        self.cross_h.setPos(row + 0.5)
        self.cross_v.show()
        self.cross_h.show()
        self.readout_label.setText(self.readout_text(t, key))
        self.readout.emit(self.readout_label.text())

    def readout_text(self, t: float, key) -> str:
        """Time, band and the coefficient nearest ``t`` (original, and as edited)."""
        m = self.adapter.model
        first, step = self._times[key]
        c = m.coefficients(self.channel, key)
        k = int(np.clip(round((t - first) / step), 0, c.shape[0] - 1))
        e = float(m.edited_coefficients(self.channel, key, k, k + 1)[0])
        lo, hi = m.band_range_hz(key)
        return (f"t {format_seconds(round(t, 6))} s  ·  {hz_range(lo, hi)} "
                f"({m.band_name(key)})  ·  c {_signed(c[k])} → {_signed(e)}")
