"""Row headers of the Scale map: each band's controls at the left edge of its row.

A header shows the band's Hz range (its name small beside it), a bar of its
energy share, its gain in dB (the lowest step is −∞: mute), a mark when a
threshold acts on it and a button that opens its trace in a lane below the
map.  Clicking a header selects the row (Ctrl adds, Shift extends): the
selected rows are the bands the map's edit buttons act on.  Figures come
from ``model.band_table(channel)`` only.
"""

from __future__ import annotations

from PySide6.QtCore import QRectF, Qt, QTimer, Signal
from PySide6.QtGui import QColor, QFontMetrics, QPainter
from PySide6.QtWidgets import (QAbstractSpinBox, QDoubleSpinBox, QHBoxLayout, QLabel, QSizePolicy, QToolButton,
                               QWidget)

from scalesieve.views.band_labels import db_to_gain, gain_to_db, hz_range
from scalesieve.gui.event_guard import reported

#: a row header's band name at least this wide, and it with the Hz range together this wide
#: (the header's 390 px less its margins, spacing, share bar, mark, gain field and buttons)
NAME_MIN, HZ_AND_NAME = 26, 124
#: the gain field's range in dB; its lowest value reads −∞ and mutes the band
GAIN_MIN_DB, GAIN_MAX_DB = -60.5, 24.0
MUTE_TEXT = "−∞ dB"


def percent_text(share: float) -> str:
    """An energy share for a narrow label, two significant digits: ``24%``, ``9.0%``,
    ``0.46%``, ``0.10%``; below 0.1 % ``<0.1%`` (and ``0%`` for nothing)."""
    p = 100.0 * share
    if p == 0:
        return "0%"
    if p < 0.1:
        return "<0.1%"
    if p >= 9.95:
        return f"{p:.0f}%"
    return f"{p:#.2g}".rstrip(".") + "%"


class ShareBar(QWidget):
    """A horizontal bar of a band's energy share with the share written on it."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.share = 0.0
        self.setFixedWidth(48)
        self.setMinimumHeight(12)
        self.setSizePolicy(QSizePolicy.Policy.Fixed, QSizePolicy.Policy.Preferred)

    def set_share(self, share: float) -> None:
        share = min(max(float(share), 0.0), 1.0)
        if share != self.share:
            self.share = share
            self.update()
        self.setToolTip(f"{100 * share:.4g} % of the channel's energy")

    def text(self) -> str:
        return percent_text(self.share)

    @reported(once=True)
    def paintEvent(self, ev):
        p = QPainter(self)
        h = min(self.height() - 2, 14)
        top = (self.height() - h) / 2
        p.fillRect(QRectF(0, top, self.width(), h), QColor("#e4e4de"))
        p.fillRect(QRectF(0, top, self.width() * self.share, h), QColor("#5b8c7a"))
        p.setPen(QColor("#1d2024"))
        f = p.font()
        f.setPointSize(7)
        p.setFont(f)
        p.drawText(QRectF(3, top, self.width() - 4, h),
                   Qt.AlignmentFlag.AlignVCenter | Qt.AlignmentFlag.AlignLeft, self.text())
        p.end()


class GainField(QDoubleSpinBox):
    """The gain in dB; the wheel changes it only once it has the focus (a wheel passing
    over a column of them scrolls the rows instead of changing gains on the way)."""

    #: below this row height the field drops its frame and arrows and its font follows
    #: the row (the arrows and frame alone take about 20 px in the usual styles)
    COMPACT_BELOW = 22

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setFocusPolicy(Qt.FocusPolicy.StrongFocus)
        self.compact = False
        self._base_font = self.font()

    def fit_height(self, h: int) -> None:
        """Fit the field to a row ``h`` px high: the full field where it fits, else a
        frameless one without arrows (keys, wheel once focused and typing still work)
        whose font is no taller than the row."""
        compact = h < self.COMPACT_BELOW
        if compact != self.compact:
            self.compact = compact
            self.setFrame(not compact)
            self.setButtonSymbols(QAbstractSpinBox.ButtonSymbols.NoButtons if compact
                                  else QAbstractSpinBox.ButtonSymbols.UpDownArrows)
            self.setAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter
                              if compact else Qt.AlignmentFlag.AlignLeft
                              | Qt.AlignmentFlag.AlignVCenter)
        # The font goes through the field's own style sheet: the window's sheet sets a
        # font size for every widget, which a plain setFont would not override.
        px = max(7, h - 3)
        sheet = ""
        if compact and QFontMetrics(self._base_font).height() > px:
            sheet = f"QAbstractSpinBox, QLineEdit {{ font-size: {px}px; }}"
        if sheet != self.styleSheet():
            self.setStyleSheet(sheet)
        self.setFixedHeight(max(1, h - 1 if compact else min(h, self.sizeHint().height())))

    @reported(once=True)
    def wheelEvent(self, ev):  # noqa: N802 - Qt API
        if not self.hasFocus():
            ev.ignore()
            return
        super().wheelEvent(ev)


class RowHeader(QWidget):
    """Controls of one band (one row of the Scale map)."""

    gainChosen = Signal(object, float)      # key, linear gain (0 mutes)
    clicked = Signal(object, object)        # key, keyboard modifiers
    laneToggled = Signal(object, bool)      # key, open

    def __init__(self, key, parent=None):
        super().__init__(parent)
        self.key = key
        self.setObjectName("rowHeader")
        self.setAttribute(Qt.WidgetAttribute.WA_StyledBackground, True)
        lay = QHBoxLayout(self)
        lay.setContentsMargins(6, 0, 4, 0)
        lay.setSpacing(4)
        self.hz = QLabel("")
        self.hz.setObjectName("bandHz")
        self.hz.setFixedWidth(HZ_AND_NAME - NAME_MIN)
        self.name = QLabel("")
        self.name.setObjectName("bandInfo")
        self.name.setFixedWidth(NAME_MIN)
        self.share = ShareBar()
        self.gain = GainField()
        self.gain.setRange(GAIN_MIN_DB, GAIN_MAX_DB)
        self.gain.setDecimals(1)
        self.gain.setSingleStep(1.0)
        self.gain.setSuffix(" dB")
        self.gain.setSpecialValueText(MUTE_TEXT)
        self.gain.setKeyboardTracking(False)
        self.gain.setFixedWidth(74)
        self.gain.setToolTip("gain of this band in dB; the lowest step, −∞, mutes it. "
                             "With several rows selected, all of them get it")
        self.mute = QToolButton()
        self.mute.setObjectName("muteToggle")
        self.mute.setCheckable(True)
        self.mute.setText("mute")
        self.mute.setToolTip("mute this band (gain −∞); click again to bring it back")
        self.mark = QLabel("")
        self.mark.setObjectName("thresholdMark")
        self.mark.setFixedWidth(14)
        self.mark.setAlignment(Qt.AlignmentFlag.AlignCenter)
        self.lane = QToolButton()
        self.lane.setObjectName("laneToggle")
        self.lane.setCheckable(True)
        self.lane.setText("trace")
        self.lane.setToolTip("show this band's trace (and what was removed from it) in a lane "
                             "below the map")
        for w in (self.hz, self.name):
            lay.addWidget(w)
        lay.addWidget(self.share)
        lay.addStretch(1)
        lay.addWidget(self.mark)
        lay.addWidget(self.gain)
        lay.addWidget(self.mute)
        lay.addWidget(self.lane)
        self._quiet = False
        self.selected = False
        self.gain.valueChanged.connect(self._gain_changed)
        self.mute.toggled.connect(self._mute_toggled)
        self.lane.toggled.connect(lambda on: self.laneToggled.emit(self.key, on))

    # ------------------------------------------------------------- showing

    def show_band(self, name: str, lo: float, hi: float, share: float,
                  figures: dict | None = None) -> None:
        """Name, Hz range and share; ``figures`` (a ``band_table`` row) for the tooltip."""
        self.hz.setText(hz_range(lo, hi))
        self.name.setText(name)
        self.share.set_share(share)
        tip = f"{name}: {hz_range(lo, hi)}"
        if figures is not None:
            kurt = figures.get("kurtosis")
            tip += (f"\n{figures['count']} coefficients · {percent_text(share)} of the energy"
                    f"\nkurtosis {'–' if kurt is None else f'{kurt:.3g}'}"
                    " (3 for Gaussian noise; large for impulsive bands)")
        for w in (self.hz, self.name, self.share):
            w.setToolTip(tip)

    def show_gain(self, gain: float | None, threshold_text: str | None) -> None:
        """The band's own gain (None: 1) and a threshold mark, without emitting."""
        self._quiet = True
        try:
            g = 1.0 if gain is None else float(gain)
            muted = g == 0.0
            self.mute.setChecked(muted)
            self.gain.setValue(GAIN_MIN_DB if muted else max(GAIN_MIN_DB + 0.1, gain_to_db(g)))
        finally:
            self._quiet = False
        self.mark.setText("λ" if threshold_text else "")
        self.mark.setToolTip(threshold_text or "")
        self._set_property("muted", muted)

    def set_selected(self, on: bool) -> None:
        self.selected = on
        self._set_property("selected", on)

    def set_lane_open(self, on: bool) -> None:
        self.lane.blockSignals(True)
        self.lane.setChecked(on)
        self.lane.blockSignals(False)

    def _set_property(self, name: str, value: bool) -> None:
        if self.property(name) != value:
            # The style sheet reads the property when the widget is polished.
            self.setProperty(name, value)
            self.style().unpolish(self)
            self.style().polish(self)

    def gain_value(self) -> float:
        """The linear gain the field shows (0 at −∞)."""
        db = self.gain.value()
        return 0.0 if db <= GAIN_MIN_DB else db_to_gain(db)

    # -------------------------------------------------------------- editing

    def _gain_changed(self, db: float) -> None:
        if self._quiet:
            return
        self.gainChosen.emit(self.key, self.gain_value())

    def _mute_toggled(self, on: bool) -> None:
        if self._quiet:
            return
        if on:
            self.gainChosen.emit(self.key, 0.0)
        else:
            db = self.gain.value()
            self.gainChosen.emit(self.key, 1.0 if db <= GAIN_MIN_DB else db_to_gain(db))

    #: the column's row height (rows alternate by a pixel where it is fractional; every
    #: row's field follows the column's, so all rows look alike), None: the own height
    row_height: float | None = None

    @reported(once=True)
    def resizeEvent(self, ev):
        super().resizeEvent(ev)
        h = self.height() if self.row_height is None else int(self.row_height)
        self.gain.fit_height(min(h, self.height()))

    @reported
    def mousePressEvent(self, ev):
        if ev.button() == Qt.MouseButton.LeftButton:
            self.clicked.emit(self.key, ev.modifiers())
            ev.accept()
            return
        super().mousePressEvent(ev)


#: row headers made in one turn of the event loop: each, with its controls, takes
#: about a millisecond to make and as long again to lay out and paint the first time,
#: so 64 packet bands made at once held the window for a fifth of a second
HEADERS_PER_TURN = 8


class RowHeaderColumn(QWidget):
    """The headers of every row, placed to line up with the map's rows.

    Headers are made ``HEADERS_PER_TURN`` at a time, the top rows at once and the
    rest in the next turns of the event loop; ``filled(keys)`` says which came.
    """

    filled = Signal(object)      # the keys whose headers were just made (a list)

    def __init__(self, parent=None):
        super().__init__(parent)
        self.headers: dict = {}
        self.order: list = []
        self._row_of: dict = {}
        self._lanes_open: set = set()         # kept for headers still to be made
        self._to_make: list = []
        self._make = None
        self._placed = (0.0, 0.0)
        self._fill_timer = QTimer(self)       # a timer, so other timers run between turns
        self._fill_timer.setSingleShot(True)
        self._fill_timer.setInterval(0)
        self._fill_timer.timeout.connect(self._make_some)
        self.empty = QLabel("Open a recording (File ▸ Open, or drop a file here): its bands "
                            "appear as rows, finest on top.", self)
        self.empty.setObjectName("hint")
        self.empty.setWordWrap(True)

    def set_keys(self, keys, make) -> None:
        keys = list(keys)
        if keys == self.order:
            return
        for h in self.headers.values():
            h.setParent(None)
            h.deleteLater()
        self.headers = {}
        self.order = keys
        self._row_of = {k: i for i, k in enumerate(keys)}
        self._make, self._to_make = make, list(keys)
        self.empty.setVisible(not keys)
        self._make_some()

    def set_lane_open(self, key, on: bool) -> None:
        """Show a band's lane as open or closed, now or when its header is made."""
        if on:
            self._lanes_open.add(key)
        else:
            self._lanes_open.discard(key)
        h = self.headers.get(key)
        if h is not None:
            h.set_lane_open(on)

    def filling(self) -> bool:
        """Headers are still to be made."""
        return bool(self._to_make)

    def _make_some(self) -> None:
        batch, self._to_make = self._to_make[:HEADERS_PER_TURN], self._to_make[HEADERS_PER_TURN:]
        top, height = self._placed
        for key in batch:
            h = self._make(key)
            h.setParent(self)
            self.headers[key] = h
            h.set_lane_open(key in self._lanes_open)
            self._place_one(key, top, height)
            h.show()
        if self._to_make:
            self._fill_timer.start()
        if batch:
            self.filled.emit(batch)

    def fit_text_columns(self) -> None:
        """One width for every row's band name (wide enough for ``w6.63``), the Hz range
        beside it taking what the header's fixed controls leave (``HZ_AND_NAME``)."""
        if not self.headers:
            return
        heads = list(self.headers.values())
        fm_name, fm_hz = heads[0].name.fontMetrics(), heads[0].hz.fontMetrics()
        name_w = max([NAME_MIN] + [fm_name.horizontalAdvance(h.name.text()) + 3 for h in heads])
        hz_w = HZ_AND_NAME - name_w
        for h in heads:
            if h.name.width() != name_w or h.hz.width() != hz_w:
                h.name.setFixedWidth(name_w)
                h.hz.setFixedWidth(hz_w)

    def place(self, top: float, row_height: float) -> None:
        """Put header i at ``top + i * row_height`` (widget coordinates)."""
        self._placed = (top, row_height)
        for key in self.headers:
            self._place_one(key, top, row_height)
        self.empty.setGeometry(8, 8, max(10, self.width() - 16), 80)

    def _place_one(self, key, top: float, row_height: float) -> None:
        i = self._row_of[key]
        y0 = int(round(top + i * row_height))
        y1 = int(round(top + (i + 1) * row_height))
        head = self.headers[key]
        head.row_height = row_height
        head.setGeometry(0, y0, self.width(), max(1, y1 - y0))
        head.gain.fit_height(min(int(row_height), head.height()))

    @reported(once=True)
    def resizeEvent(self, ev):
        super().resizeEvent(ev)
        self.empty.setGeometry(8, 8, max(10, self.width() - 16), 80)
