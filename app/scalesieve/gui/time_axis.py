"""One time range shared by every pane: zoom or pan in one and all follow."""

from __future__ import annotations

from PySide6.QtCore import QObject, Signal

#: the narrowest view, in samples (a handful of samples stays readable)
MIN_SAMPLES = 16


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

    def reset(self, duration: float, rate: float) -> None:
        """A new recording: show all of it."""
        self.duration = max(float(duration), 1e-12)
        self.rate = float(rate)
        self.set_range(0.0, self.duration, force=True)

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
