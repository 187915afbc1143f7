"""Events pane: the transients table, its controls, and what choosing an event does.

The pane only shows what the model finds (``DecompositionModel.events``, the
same code path as ``scalesieve events`` and the Python API) and sends one
kind of edit back: a region edit over an event (gain 0, for example to take
out a click).

It takes either a ``DecompositionModel`` or a Qt adapter that holds one (an
object with a ``model`` attribute, ``None`` while the model is busy, and a
``modelReplaced`` signal; an ``add_edit(edit)`` method if edits should go
through it).  Optional partners, all duck-typed so the pane stands alone:

* ``time_axis``: an object with ``set_range(t0, t1)`` (the shared time
  axis); choosing an event zooms every pane to it, with a margin;
* ``scale_map``: an object with a pyqtgraph ``plot`` and its band ``keys``
  (rows top to bottom); the chosen event is outlined on it.

Signals (for a window that wires things itself):

``eventSelected(start_s, stop_s)``, ``zoomRequested(t0, t1)`` (the span
with its margin), ``eventChosen(object)`` (the Event or None),
``regionRequested(object)`` (the region Edit, emitted before it is
applied), ``eventsChanged(int)`` (count after each detection),
``channelRequested(int)`` (the chosen event is on another channel than the
one the window shows, as told by ``set_channel``).  The outline on the
Scale map is drawn only while the map shows the event's channel.

Keys: ``]`` next event, ``[`` previous (in the table's current order), while
the pane's window is active.  Detection runs on the GUI thread after a
short pause in typing: with the prepared levels kept by the model, a new k
costs milliseconds on a recording of minutes.
"""

from __future__ import annotations

import os

from PySide6.QtCore import (QAbstractTableModel, QModelIndex, QSortFilterProxyModel, Qt, QTimer,
                            Signal)
from PySide6.QtGui import QKeySequence, QShortcut
from PySide6.QtWidgets import (QAbstractItemView, QComboBox, QDoubleSpinBox, QFileDialog,
                               QGridLayout, QHeaderView, QLabel, QLineEdit, QMessageBox,
                               QPushButton, QTableView, QVBoxLayout, QWidget)

from scalesieve.core import events as ev
from scalesieve.core.transforms import max_level
from scalesieve.errors import ScalesieveError
from scalesieve.recipe import Edit, parse_levels
from scalesieve.gui.event_guard import reported

#: pause after the last change of k or levels before detection reruns (ms)
RERUN_DELAY_MS = 150
#: margin either side of an event when zooming: this many event lengths ...
ZOOM_MARGIN_FACTOR = 2.0
#: ... but at least this many seconds
ZOOM_MARGIN_MIN_S = 0.005
NEXT_KEYS = ("]",)
PREVIOUS_KEYS = ("[",)
CAUTION = ("Times and rates support a judgement, they do not make one: decisions about "
           "machines follow the applicable standards and qualified people; physiological "
           "traces are for research only, not for diagnosis.")

#: table columns: event field, header, tooltip
COLUMNS = (
    ("start_s", "start (s)", "first sample the event's coefficients read"),
    ("stop_s", "stop (s)", "last sample the event's coefficients read"),
    ("peak_s", "time (s)", "time of the event: centre of its strongest coefficient"),
    ("level", "level", "detail level of the strongest coefficient (1 = finest)"),
    ("score", "score (σ)", "largest |c| / σ of its level in the event"),
    ("peak", "peak", "largest absolute sample of the signal in the event"),
    ("channel", "channel", "channel of the recording (0 = first)"),
)
#: widest a column starts (the user may widen it)
COLUMN_MAX_PX = 70
#: the order the columns are shown in
VISIBLE_ORDER = ("peak_s", "score", "level", "channel", "start_s", "stop_s", "peak")
#: columns left out while the table is too narrow for them (each row's tooltip and the
#: CSV export keep them); the others are always shown
OPTIONAL_COLUMNS = ("start_s", "stop_s", "peak")
TRANSFORMS = (("swt", "SWT: sharper timing"), ("dwt", "DWT"))


def zoom_span(event, duration_s: float) -> tuple[float, float]:
    """The time range to show for an event: the event with a margin each side."""
    width = max(event.stop_s - event.start_s, 0.0)
    margin = max(ZOOM_MARGIN_FACTOR * width, ZOOM_MARGIN_MIN_S)
    return max(0.0, event.start_s - margin), min(duration_s, event.stop_s + margin)


def region_edit(event, levels) -> Edit:
    """A region edit muting the searched levels over an event, on its channel only."""
    return Edit("region", levels=tuple(levels), start_s=float(event.start_s),
                stop_s=float(event.stop_s), gain=0.0, channels=(int(event.channel),))


def summary_text(events, best, channels: int) -> str:
    """One line: how many events and the clearest train's rate."""
    n = len(events)
    text = f"{n} event{'s' if n != 1 else ''}"
    if channels > 1:
        per = [sum(1 for e in events if e.channel == c) for c in range(channels)]
        text += " (" + ", ".join(f"ch {c}: {k}" for c, k in enumerate(per)) + ")"
    if best is None:
        return text + "  ·  no regular train"
    return (text + f"  ·  train on ch {best['channel']}: {best['rate_hz']:.4g} Hz "
            f"(spread {best['spread_hz']:.2g} Hz), every {1e3 * best['interval_s']:.4g} ms, "
            f"{best['count']} events")


class EventTable(QAbstractTableModel):
    """The events as a Qt table; ``Qt.UserRole`` gives raw numbers for sorting."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.events: list = []

    def set_events(self, events) -> None:
        self.beginResetModel()
        self.events = list(events)
        self.endResetModel()

    @reported(fallback=0, once=True)
    def rowCount(self, parent=QModelIndex()) -> int:  # noqa: N802 - Qt API
        return 0 if parent.isValid() else len(self.events)

    @reported(fallback=0, once=True)
    def columnCount(self, parent=QModelIndex()) -> int:  # noqa: N802 - Qt API
        return 0 if parent.isValid() else len(COLUMNS)

    @reported(once=True)
    def data(self, index, role=Qt.ItemDataRole.DisplayRole):
        if not index.isValid():
            return None
        e = self.events[index.row()]
        field = COLUMNS[index.column()][0]
        value = getattr(e, field)
        if role == Qt.ItemDataRole.UserRole:
            return value
        if role == Qt.ItemDataRole.DisplayRole:
            if field in ("level", "channel"):
                return str(value)
            if field == "score":
                return f"{value:.2f}"
            if field == "peak":
                return f"{value:.4g}"
            return f"{value:.6f}"
        if role == Qt.ItemDataRole.TextAlignmentRole:
            return int(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
        if role == Qt.ItemDataRole.ToolTipRole:
            return (f"time {e.peak_s:.6f} s · score {e.score:.2f} σ · level {e.level} · "
                    f"channel {e.channel}\nfrom {e.start_s:.6f} to {e.stop_s:.6f} s · "
                    f"peak {e.peak:.4g}")
        return None

    @reported(once=True)
    def headerData(self, section, orientation, role=Qt.ItemDataRole.DisplayRole):  # noqa: N802
        if orientation != Qt.Orientation.Horizontal:
            return None
        if role == Qt.ItemDataRole.DisplayRole:
            return COLUMNS[section][1]
        if role == Qt.ItemDataRole.ToolTipRole:
            return COLUMNS[section][2]
        return None


class _ChannelFilter(QSortFilterProxyModel):
    """Sorts by raw numbers and shows one channel or all."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.channel: int | None = None
        self.setSortRole(Qt.ItemDataRole.UserRole)

    def set_channel(self, channel: int | None) -> None:
        if hasattr(self, "beginFilterChange"):        # Qt 6.9 and later
            self.beginFilterChange()
            self.channel = channel
            self.endFilterChange()
        else:
            self.channel = channel
            self.invalidateFilter()

    @reported(fallback=True, once=True)
    def filterAcceptsRow(self, row, parent) -> bool:  # noqa: N802 - Qt API
        if self.channel is None:
            return True
        return self.sourceModel().events[row].channel == self.channel


class EventMark:
    """An outline of the chosen event on a Scale map (rows of its searched levels)."""

    def __init__(self, scale_map):
        import pyqtgraph as pg

        from scalesieve.gui.resource_files import colour

        self.scale_map = scale_map
        pen = pg.mkPen(colour("traces", "region_selected"), width=2)
        self.box = pg.QtWidgets.QGraphicsRectItem()
        self.box.setPen(pen)
        self.box.setZValue(40)
        self.line = pg.InfiniteLine(angle=90, movable=False,
                                    pen=pg.mkPen(colour("traces", "region_selected"), width=1,
                                                 style=Qt.PenStyle.DotLine))
        self.line.setZValue(40)
        self._added = False

    def _plot(self):
        return getattr(self.scale_map, "plot", None)

    def show(self, event, levels) -> None:
        plot = self._plot()
        if plot is None:
            return
        shown = getattr(self.scale_map, "channel", None)
        if shown is not None and shown != event.channel:
            self.clear()            # the map shows another channel: no mark there
            return
        keys = list(getattr(self.scale_map, "keys", []) or [])
        rows = [keys.index(j) for j in levels if j in keys]
        top, bottom = (min(rows), max(rows) + 1) if rows else (0, max(1, len(keys)))
        self.box.setRect(event.start_s, top, max(event.stop_s - event.start_s, 1e-9),
                         bottom - top)
        self.line.setValue(event.peak_s)
        if not self._added or self.box.scene() is None:
            plot.addItem(self.box, ignoreBounds=True)
            plot.addItem(self.line, ignoreBounds=True)
            self._added = True
        self.box.show()
        self.line.show()

    def clear(self) -> None:
        self.box.hide()
        self.line.hide()

    @property
    def visible(self) -> bool:
        return self._added and self.box.isVisible()


class _FittingTable(QTableView):
    """The events table; on a change of width the pane fits its columns to it."""

    def __init__(self, pane):
        super().__init__()
        self._pane = pane
        self.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAsNeeded)

    @reported(once=True)
    def resizeEvent(self, ev):  # noqa: N802 - Qt API
        super().resizeEvent(ev)
        if ev.size().width() != ev.oldSize().width():
            self._pane.fit_columns()


class EventsPane(QWidget):
    """Table of transients with k, levels and timing controls (see the module notes)."""

    eventSelected = Signal(float, float)
    zoomRequested = Signal(float, float)
    eventChosen = Signal(object)
    regionRequested = Signal(object)
    eventsChanged = Signal(int)
    channelRequested = Signal(int)

    def __init__(self, source=None, time_axis=None, scale_map=None, parent=None,
                 apply_edits: bool = True):
        super().__init__(parent)
        self.setObjectName("eventsPane")
        self.time_axis = time_axis
        self.mark = EventMark(scale_map) if scale_map is not None else None
        self.apply_edits = apply_edits
        self.events: list = []
        self.noise: list = []
        self.repetition = None
        self.repetition_per_channel: list = []
        self.levels: tuple = ev.DEFAULT_LEVELS
        self.error = ""
        self._adapter = None
        self._model = None
        self._sized = False
        self.window_channel: int | None = None
        if source is not None and hasattr(source, "modelReplaced"):
            self._adapter = source
            source.modelReplaced.connect(self._on_model_replaced)
        else:
            self._model = source
        self._build()
        self._timer = QTimer(self)
        self._timer.setSingleShot(True)
        self._timer.setInterval(RERUN_DELAY_MS)
        self._timer.timeout.connect(self.refresh)
        self._on_model_replaced()

    # ----------------------------------------------------------------- build

    def _build(self) -> None:
        outer = QVBoxLayout(self)
        outer.setContentsMargins(6, 4, 6, 4)
        outer.setSpacing(4)
        # Two narrow columns of controls: the pane usually sits in a side dock.
        grid = QGridLayout()
        grid.setHorizontalSpacing(6)
        grid.setVerticalSpacing(3)
        self.levels_edit = QLineEdit(",".join(str(j) for j in ev.DEFAULT_LEVELS))
        self.levels_edit.setToolTip("detail levels to search: 1,2 or 1-3 or details "
                                    "(1 is the finest)")
        self.k_box = QDoubleSpinBox()
        self.k_box.setRange(1.0, 100.0)
        self.k_box.setSingleStep(0.5)
        self.k_box.setDecimals(2)
        self.k_box.setValue(ev.DEFAULT_K)
        self.k_box.setToolTip("threshold in units of each level's noise σ "
                              "(σ = median|d| / 0.6745); on Gaussian noise a coefficient "
                              "exceeds k σ with probability 2(1 − Φ(k))")
        self.kind_box = QComboBox()
        for kind, label in TRANSFORMS:
            self.kind_box.addItem(label, kind)
        self.kind_box.setToolTip("transform that times the events; the SWT places onsets "
                                 "to a sample or two, the DWT only on its 2^j grid")
        self.channel_box = QComboBox()
        self.channel_box.addItem("all channels", None)
        self.channel_label = QLabel("show")
        for row, (label, widget) in enumerate((("levels", self.levels_edit), ("k", self.k_box),
                                               ("timing", self.kind_box),
                                               (self.channel_label, self.channel_box))):
            grid.addWidget(label if isinstance(label, QLabel) else QLabel(label), row, 0)
            grid.addWidget(widget, row, 1)
        grid.setColumnStretch(1, 1)
        outer.addLayout(grid)

        self.prev_button = QPushButton("Previous")
        self.prev_button.setToolTip("previous event in the table (key [)")
        self.next_button = QPushButton("Next")
        self.next_button.setToolTip("next event in the table (key ])")
        self.region_button = QPushButton("Mute as region")
        self.region_button.setToolTip("add a region edit with gain 0 over the chosen event, "
                                      "on the searched levels and its channel (e.g. to take "
                                      "out a click)")
        self.export_button = QPushButton("Export CSV…")
        self.export_button.setToolTip("write every event (time order) as CSV, the same "
                                      "columns as 'scalesieve events --csv'")
        buttons = QGridLayout()
        buttons.setSpacing(4)
        buttons.addWidget(self.prev_button, 0, 0)
        buttons.addWidget(self.next_button, 0, 1)
        buttons.addWidget(self.region_button, 1, 0)
        buttons.addWidget(self.export_button, 1, 1)
        outer.addLayout(buttons)

        self.summary = QLabel("")
        self.summary.setObjectName("eventsSummary")
        self.summary.setWordWrap(True)
        self.summary.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        outer.addWidget(self.summary)

        self.table_model = EventTable(self)
        self.proxy = _ChannelFilter(self)
        self.proxy.setSourceModel(self.table_model)
        self.table = _FittingTable(self)
        self.table.setModel(self.proxy)
        self.table.setSortingEnabled(True)
        self.table.sortByColumn(0, Qt.SortOrder.AscendingOrder)
        self.table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.table.verticalHeader().setVisible(False)
        header = self.table.horizontalHeader()
        header.setSectionResizeMode(QHeaderView.ResizeMode.Interactive)
        header.setStretchLastSection(True)
        header.setResizeContentsPrecision(200)   # size columns from the first rows only
        # What tells events apart comes first at a side dock's width: time, score,
        # level and channel; start, stop and the signal's peak follow.
        fields = [c[0] for c in COLUMNS]
        for visual, field in enumerate(VISIBLE_ORDER):
            header.moveSection(header.visualIndex(fields.index(field)), visual)
        self.table.setAlternatingRowColors(True)
        self.table.verticalHeader().setDefaultSectionSize(22)
        outer.addWidget(self.table, 1)

        self.caution = QLabel(CAUTION)
        self.caution.setObjectName("caution")
        self.caution.setWordWrap(True)
        outer.addWidget(self.caution)

        self.levels_edit.textChanged.connect(self._schedule)
        self.k_box.valueChanged.connect(self._schedule)
        self.kind_box.currentIndexChanged.connect(self._schedule)
        self.channel_box.currentIndexChanged.connect(self._channel_filter)
        self.table.selectionModel().currentRowChanged.connect(self._row_changed)
        self.prev_button.clicked.connect(self.previous_event)
        self.next_button.clicked.connect(self.next_event)
        self.region_button.clicked.connect(self.mute_chosen)
        self.export_button.clicked.connect(self._export_clicked)
        self._shortcuts = []
        for keys, fn in ((NEXT_KEYS, self.next_event), (PREVIOUS_KEYS, self.previous_event)):
            for key in keys:
                sc = QShortcut(QKeySequence(key), self)
                sc.setContext(Qt.ShortcutContext.WindowShortcut)
                sc.activated.connect(fn)
                self._shortcuts.append(sc)

    # ----------------------------------------------------------------- model

    @property
    def model(self):
        """The model the events come from (None while the adapter's is busy)."""
        if self._adapter is not None:
            return self._adapter.model
        return self._model

    def set_model(self, model) -> None:
        """Show the events of a plain model (not needed with an adapter)."""
        self._model = model
        self._on_model_replaced()

    def _on_model_replaced(self) -> None:
        m = self.model
        keep = self.channel_box.currentData()
        self.channel_box.blockSignals(True)
        self.channel_box.clear()
        self.channel_box.addItem("all channels", None)
        if m is not None:
            names = m.recording.channel_names
            for c in range(m.recording.channels):
                self.channel_box.addItem(f"ch {c} ({names[c]})", c)
        idx = self.channel_box.findData(keep)
        self.channel_box.setCurrentIndex(max(idx, 0))
        self.channel_box.blockSignals(False)
        many = m is not None and m.recording.channels > 1
        self.channel_box.setVisible(many)
        self.channel_label.setVisible(many)
        self.proxy.set_channel(self.channel_box.currentData())
        self.refresh()

    def _schedule(self, *_):
        self._timer.start()

    # ------------------------------------------------------------- detection

    @property
    def k(self) -> float:
        return float(self.k_box.value())

    @property
    def kind(self) -> str:
        return str(self.kind_box.currentData())

    def settings(self) -> dict:
        """The detection settings as the command line spells them."""
        return {"levels": self.levels_edit.text(), "k": self.k, "transform": self.kind}

    def refresh(self) -> None:
        """Run detection now with the current settings."""
        self._timer.stop()
        m = self.model
        if m is None:
            self._show([], [], "no recording yet" if self._adapter is None or
                       self._adapter.recording is None else "waiting for the decomposition")
            return
        try:
            levels = ev.check_levels(parse_levels(self.levels_edit.text()), m.level,
                                     max_level(m.recording.n, m.spec.wavelet))
        except ValueError as exc:
            self._bad_levels(str(exc))
            return
        self.levels_edit.setStyleSheet("")
        self.levels = levels
        try:
            events, noise = m.events(levels, self.k, kind=self.kind)
        except ScalesieveError as exc:
            self._show([], [], exc.one_line())
            return
        self._show(events, noise, "")

    def _bad_levels(self, message: str) -> None:
        self.levels_edit.setStyleSheet("border: 1px solid #d55e00;")
        self.error = f"levels: {message}"
        self.summary.setText(self.error)

    def _show(self, events, noise, error: str) -> None:
        chosen = self.chosen_event()
        self.events, self.noise, self.error = list(events), list(noise), error
        m = self.model
        channels = m.recording.channels if m is not None else 1
        self.repetition, self.repetition_per_channel = ev.repetition_by_channel(self.events,
                                                                                channels)
        self.table_model.set_events(self.events)
        if self.events and not self._sized:
            self.table.resizeColumnsToContents()
            # narrow enough that time, score, level and channel show at a side dock's width
            header = self.table.horizontalHeader()
            for col in range(len(COLUMNS)):
                header.resizeSection(col, min(header.sectionSize(col), COLUMN_MAX_PX))
            self._sized = True
            self.fit_columns()
        self.summary.setText(error or summary_text(self.events, self.repetition, channels))
        self.summary.setToolTip("noise σ per level: " + ", ".join(
            f"ch {r['channel']} d{r['level']} {r['sigma']:.4g}" for r in self.noise))
        self.eventsChanged.emit(len(self.events))
        # keep the choice on the event that now holds the same moment
        same = [e for e in self.events if chosen is not None and e.channel == chosen.channel
                and e.start_s <= chosen.peak_s <= e.stop_s]
        if same:
            self.select_event(same[0], emit=False)
        elif self.mark is not None:
            self.mark.clear()

    def fit_columns(self) -> None:
        """Show the optional columns (start, stop, peak) that fit beside the others in the
        table's width, in their order, so the table never needs a sideways scroll in a
        narrow dock; the hidden ones stay in each row's tooltip and the CSV export."""
        header = self.table.horizontalHeader()
        fields = [c[0] for c in COLUMNS]
        room = self.table.viewport().width()
        used = sum(header.sectionSize(fields.index(f)) for f in VISIBLE_ORDER
                   if f not in OPTIONAL_COLUMNS)
        fits = True
        for f in VISIBLE_ORDER:
            if f not in OPTIONAL_COLUMNS:
                continue
            col = fields.index(f)
            fits = fits and used + header.sectionSize(col) <= room
            if fits:
                used += header.sectionSize(col)
            if header.isSectionHidden(col) == fits:
                header.setSectionHidden(col, not fits)

    # ------------------------------------------------------------- choosing

    def chosen_event(self):
        idx = self.table.selectionModel().currentIndex() if self.table.selectionModel() else None
        if idx is None or not idx.isValid():
            return None
        row = self.proxy.mapToSource(idx).row()
        return self.table_model.events[row] if 0 <= row < len(self.table_model.events) else None

    def select_row(self, row: int) -> None:
        """Choose the event on row ``row`` of the table as it is sorted now."""
        if not 0 <= row < self.proxy.rowCount():
            return
        idx = self.proxy.index(row, 0)
        self.table.selectionModel().setCurrentIndex(
            idx, self.table.selectionModel().SelectionFlag.ClearAndSelect
            | self.table.selectionModel().SelectionFlag.Rows)
        self.table.scrollTo(idx)

    def select_event(self, event, emit: bool = True) -> None:
        try:
            src = self.table_model.events.index(event)
        except ValueError:
            return
        idx = self.proxy.mapFromSource(self.table_model.index(src, 0))
        if not idx.isValid():
            return
        if not emit:
            self.table.selectionModel().blockSignals(True)
        self.select_row(idx.row())
        if not emit:
            self.table.selectionModel().blockSignals(False)
            if self.mark is not None:
                self.mark.show(event, self.levels)

    def current_row(self) -> int:
        idx = self.table.selectionModel().currentIndex()
        return idx.row() if idx.isValid() else -1

    def next_event(self) -> None:
        row = self.current_row()
        self.select_row(min(row + 1, self.proxy.rowCount() - 1))

    def previous_event(self) -> None:
        row = self.current_row()
        self.select_row(max(row - 1, 0) if row >= 0 else 0)

    def _row_changed(self, current, _previous) -> None:
        e = self.chosen_event()
        self.eventChosen.emit(e)
        if e is None:
            if self.mark is not None:
                self.mark.clear()
            return
        shown = self.window_channel
        if shown is None and self.mark is not None:
            shown = getattr(self.mark.scale_map, "channel", None)
        if shown is not None and e.channel != shown:
            self.channelRequested.emit(e.channel)      # show the event's own channel
        self.eventSelected.emit(e.start_s, e.stop_s)
        m = self.model
        duration = m.recording.duration_s if m is not None else e.stop_s
        t0, t1 = zoom_span(e, duration)
        self.zoomRequested.emit(t0, t1)
        if self.time_axis is not None:
            self.time_axis.set_range(t0, t1)
        if self.mark is not None:
            self.mark.show(e, self.levels)

    def _channel_filter(self, *_):
        self.proxy.set_channel(self.channel_box.currentData())

    def set_channel(self, channel: int) -> None:
        """The window shows ``channel``: a table showing one channel follows it."""
        self.window_channel = int(channel)
        if self.channel_box.currentData() is not None:
            idx = self.channel_box.findData(self.window_channel)
            if idx >= 0:
                self.channel_box.setCurrentIndex(idx)
        e = self.chosen_event()
        if self.mark is not None:
            if e is None:
                self.mark.clear()
            else:
                self.mark.show(e, self.levels)

    # ---------------------------------------------------------------- edits

    def mute_chosen(self) -> Edit | None:
        """Turn the chosen event into a region edit (gain 0); returns the edit."""
        e = self.chosen_event()
        if e is None:
            self.summary.setText("choose an event in the table first")
            return None
        edit = region_edit(e, self.levels)
        self.regionRequested.emit(edit)
        if self.apply_edits:
            target = self._adapter if self._adapter is not None and \
                hasattr(self._adapter, "add_edit") else self.model
            if target is not None:
                try:
                    target.add_edit(edit)
                except ScalesieveError as exc:
                    self.summary.setText(exc.one_line())
                    return None
        return edit

    # --------------------------------------------------------------- export

    def export_csv(self, path: str, force: bool = False) -> dict:
        """Write every event (time order) as ``scalesieve events --csv`` does."""
        from scalesieve.io.writers import write_table_csv

        m = self.model
        protect = [m.recording.source] if m is not None and m.recording.source else []
        return write_table_csv(path, [e.to_json() for e in self.events], force=force,
                               fieldnames=ev.FIELDS, protect=protect)

    def _export_clicked(self) -> None:
        m = self.model
        start = ""
        if m is not None and m.recording.source:
            base = os.path.splitext(m.recording.source)[0]
            start = base + ".found-events.csv"
        path, _ = QFileDialog.getSaveFileName(self, "Export events", start, "CSV (*.csv)")
        if not path:
            return
        try:
            # the dialog has already asked before replacing an existing file
            self.export_csv(path, force=os.path.exists(path))
        except ScalesieveError as exc:
            QMessageBox.warning(self, "Export events", exc.one_line())
            return
        self.summary.setText(f"wrote {len(self.events)} events to {path}")
