"""One time range shared by every pane: zoom or pan in one and all follow."""

from __future__ import annotations

from datetime import datetime, timedelta

from PySide6.QtCore import QObject, Signal

#: the narrowest view, in samples (a handful of samples stays readable)
MIN_SAMPLES = 16


def clock_labels(values, spacing: float, start: datetime) -> list[str]:
    """Tick labels in the recording's own clock for times ``values`` (s from the start).

    Seconds with as many decimals as the tick spacing needs; the date where
    ticks are a day or more apart.
    """
    if spacing >= 86400:
        return [(start + timedelta(seconds=float(v))).strftime("%Y-%m-%d") for v in values]
    digits = 0
    while digits < 6 and abs(spacing * 10**digits - round(spacing * 10**digits)) > 1e-6:
        digits += 1
    unit = 10 ** (6 - digits)
    out = []
    for v in values:
        at = start + timedelta(seconds=float(v))
        us = int(round(at.microsecond / unit)) * unit
        at = at.replace(microsecond=0) + timedelta(microseconds=us)
        text = at.strftime("%H:%M:%S")
        if digits:
            text += "." + f"{at.microsecond:06d}"[:digits]
        out.append(text)
    return out


class SharedTimeAxis(QObject):
    """The visible span ``t0 .. t1`` (seconds) of a recording ``0 .. duration``.

    Panes ``link`` their pyqtgraph ViewBoxes: a user zoom in any of them
    sets the shared range, and every other linked box follows exactly (by
    value, not by pixel, so panes of different widths still agree).
    """

    rangeChanged = Signal(float, float)

    def __init__(self, parent=None):
        super().__init__(parent)
        self.duration = 1.0
        self.rate = 1.0
        self.t0, self.t1 = 0.0, 1.0
        self._boxes: list = []
        self._syncing = False
        self.clock_start: datetime | None = None   # the recording's own clock, if any
        self.show_clock = True
        self._action = None

    def reset(self, duration: float, rate: float) -> None:
        """A new recording: show all of it."""
        self.duration = max(float(duration), 1e-12)
        self.rate = float(rate)
        self.set_range(0.0, self.duration, force=True)

    # ------------------------------------------------------------ clock time

    def set_clock(self, start: datetime | None) -> None:
        """The recording's clock at its first sample (None: seconds only)."""
        self.clock_start = start
        if self._action is not None:
            self._action.setEnabled(start is not None)
        for box in list(self._boxes):
            self._label_axis(box)

    def clock_action(self, parent):
        """A checkable menu action: time axis in the recording's clock, or in seconds."""
        from PySide6.QtGui import QAction

        self._action = QAction("Clock time on the time axis", parent, checkable=True)
        self._action.setChecked(self.show_clock)
        self._action.setEnabled(self.clock_start is not None)
        self._action.setToolTip("show the recording's own clock (from its timestamps or "
                                "header) instead of seconds from the start")
        self._action.toggled.connect(self._toggle_clock)
        return self._action

    def _toggle_clock(self, on: bool) -> None:
        self.show_clock = bool(on)
        for box in list(self._boxes):
            self._label_axis(box)

    def _label_axis(self, box) -> None:
        """Switch the bottom axis of ``box``'s plot between clock time and seconds."""
        plot = box.parentItem()
        axis = plot.getAxis("bottom") if hasattr(plot, "getAxis") else None
        if axis is None:
            return
        clock = self.clock_start if self.show_clock else None
        if clock is not None:
            axis.tickStrings = lambda values, scale, spacing: clock_labels(values, spacing,
                                                                           clock)
            axis.enableAutoSIPrefix(False)
            if axis.isVisible() and axis.label.isVisible():
                axis.setLabel(f"clock time (from {clock.isoformat(sep=' ')})")
        elif "tickStrings" in axis.__dict__:
            del axis.tickStrings  # the class's own seconds
            axis.enableAutoSIPrefix(False)   # seconds at every length, as the Overview says
            if axis.isVisible() and axis.label.isVisible():
                axis.setLabel("time", units="s")
        axis.picture = None
        axis.update()

    def set_range(self, t0: float, t1: float, force: bool = False) -> None:
        t0, t1 = self._clamp(float(t0), float(t1))
        if not force and abs(t0 - self.t0) < 1e-12 and abs(t1 - self.t1) < 1e-12:
            return
        self.t0, self.t1 = t0, t1
        self._push()
        self.rangeChanged.emit(t0, t1)

    def show_all(self) -> None:
        self.set_range(0.0, self.duration)

    def zoom(self, factor: float, centre: float | None = None) -> None:
        """Narrow (factor < 1) or widen (factor > 1) the view around ``centre``."""
        c = 0.5 * (self.t0 + self.t1) if centre is None else centre
        half = 0.5 * (self.t1 - self.t0) * factor
        self.set_range(c - half, c + half)

    def pan(self, fraction: float) -> None:
        """Move by a fraction of the visible width (negative: earlier)."""
        w = self.t1 - self.t0
        self.set_range(self.t0 + fraction * w, self.t1 + fraction * w)

    def _clamp(self, t0: float, t1: float) -> tuple[float, float]:
        if t1 < t0:
            t0, t1 = t1, t0
        narrowest = MIN_SAMPLES / self.rate if self.rate > 0 else 0.0
        width = min(max(t1 - t0, narrowest), self.duration)
        if t0 < 0:
            t0 = 0.0
        if t0 + width > self.duration:
            t0 = self.duration - width
        return t0, t0 + width

    # ------------------------------------------------------------ view boxes

    def link(self, view_box) -> None:
        """Follow and drive the shared range from a pyqtgraph ViewBox."""
        self._boxes.append(view_box)
        view_box.setLimits(xMin=0.0, xMax=self.duration)
        view_box.sigXRangeChanged.connect(self._from_box)
        self._sync_box(view_box)
        if self.clock_start is not None:
            self._label_axis(view_box)

    def unlink(self, view_box) -> None:
        if view_box in self._boxes:
            self._boxes.remove(view_box)
            try:
                view_box.sigXRangeChanged.disconnect(self._from_box)
            except (RuntimeError, TypeError):
                pass

    def _from_box(self, view_box, rng) -> None:
        if self._syncing:
            return
        self.set_range(rng[0], rng[1])

    def _sync_box(self, box) -> None:
        box.setLimits(xMin=0.0, xMax=self.duration)
        box.setXRange(self.t0, self.t1, padding=0.0, update=True)

    def _push(self) -> None:
        self._syncing = True
        try:
            for box in list(self._boxes):
                try:
                    self._sync_box(box)
                except RuntimeError:  # the box's widget was deleted
                    self._boxes.remove(box)
        finally:
            self._syncing = False
