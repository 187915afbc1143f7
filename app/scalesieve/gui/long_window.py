"""The window on a recording longer than its memory budget ("long recording" mode).

The recording is never held whole: the Scale map and traces come from the
summary when zoomed out and from exact local synthesis when zoomed in
(``views.long_picture``), each edit redraws only the view, and an export
runs the edits over the whole file through the streaming pipeline, in a
worker thread, written atomically.  Panes that need the whole array (the
Impacts dock, Events, band lanes) are not offered here, and the status line
says so.
"""

from __future__ import annotations

import os
import time
from types import SimpleNamespace

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (QApplication, QComboBox, QFileDialog, QLabel, QMainWindow,
                               QProgressBar, QSplitter, QToolBar)

from scalesieve.core import transforms as tf
from scalesieve.errors import ScalesieveError
from scalesieve.gui.error_dialog import show_error
from scalesieve.gui.long_panes import LongOverview, LongScaleMap, LongTraces
from scalesieve.gui.long_regions import LongRegions
from scalesieve.gui.long_sessions import LongSessions
from scalesieve.gui.long_worker import LongWorker
from scalesieve.recipe import Edit
from scalesieve.views.long_picture import EXACT_MOST, rows_of
from scalesieve.gui.event_guard import reported

#: width of every pane's gutter, so that the time axes line up
GUTTER = 400

#: what the window does not offer for a long recording, said on the status line
NOT_HERE = "Impacts, Events and band lanes need the whole recording in memory: not available here"


class LongWindow(QMainWindow):
    """A long recording: its summary, the current edits, the view, the export."""

    painted = Signal(int)       # a request drawn (its number)

    def __init__(self, parent=None, keep_sessions: bool = False, ask=None, tell=None):
        super().__init__(parent)
        self.setWindowTitle("Scalesieve — long recording")
        self.worker = LongWorker(self)
        # edits saved after each change and kept at close unless saved or exported
        # (autosave; not for snapshots); an earlier session's offered back (``ask``)
        self.worker.keep_sessions = keep_sessions
        self.sessions = LongSessions(self, ask, tell)
        self.pending_edits = None        # (recipe, path, kept file) restored before opening
        self.captured = None             # the recipe as last saved or exported
        self.lr = None
        self.base_edits: tuple = ()      # the recipe's, as opened
        self.channel = 0
        self.view = (0, 1)               # samples in view
        self.painted_number = 0
        self.asked_number = 0
        self.last_paint_s = 0.0
        #: views spanning at most this many samples are synthesised exactly
        self.exact_most = EXACT_MOST
        self._setting_range = False
        self._build()
        self.worker.opened.connect(self._opened)
        self.worker.progress.connect(self._progress)
        self.worker.drawn.connect(self._drawn)
        self.worker.failed.connect(self._failed)
        self.worker.exported.connect(self._exported)
        self.worker.swept.connect(self._ask)
        self.worker.notice.connect(lambda text: self.progress_text.setText(text))
        self.worker.restore_found.connect(self.sessions.found)

    # ------------------------------------------------------------------ layout

    def _build(self) -> None:
        menu = self.menuBar().addMenu("&File")
        self.export_menu_action = menu.addAction("Export signal…", self.export_dialog)
        self.save_recipe_action = menu.addAction("Save recipe…", self.save_recipe_dialog)
        self.save_recipe_action.setEnabled(False)
        from scalesieve.gui.kept_sessions import KeptEditsMenu

        self.kept_menu = KeptEditsMenu(self)
        menu.addMenu(self.kept_menu)
        menu.addSeparator()
        menu.addAction("Close", self.close)
        panes = self.menuBar().addMenu("&View")
        for name in ("Impacts (Impulse map, Envelope spectrum)", "Events", "Band lanes"):
            a = panes.addAction(f"{name}: not available for long recordings")
            a.setEnabled(False)
        bar = QToolBar("Main")
        bar.setMovable(False)
        self.addToolBar(bar)
        self.export_action = bar.addAction("Export signal…", self.export_dialog)
        self.export_action.setEnabled(False)
        self.show_all_action = bar.addAction("Show all", self.show_all)
        bar.addSeparator()
        bar.addWidget(QLabel(" Channel "))
        self.channel_box = QComboBox()
        self.channel_box.currentIndexChanged.connect(self._channel_chosen)
        bar.addWidget(self.channel_box)
        self.scale_map = LongScaleMap()
        self.traces = LongTraces()
        self.overview = LongOverview()
        for pane in (self.scale_map, self.traces, self.overview):
            pane.gutter.setFixedWidth(GUTTER)
        # a splitter: the band rows keep their height, the traces take what is left
        self.splitter = QSplitter(Qt.Orientation.Vertical)
        self.splitter.setChildrenCollapsible(False)
        for i, pane in enumerate((self.scale_map, self.traces, self.overview)):
            self.splitter.addWidget(pane)
            self.splitter.setStretchFactor(i, 1 if pane is self.traces else 0)
        self.setCentralWidget(self.splitter)
        self.facts = QLabel("opening…")
        self.mode_line = QLabel("")
        self.mode_line.setObjectName("hint")
        self.progress_bar = QProgressBar()
        self.progress_bar.setFixedWidth(220)
        self.progress_bar.setRange(0, 1000)
        self.progress_bar.hide()
        self.progress_text = QLabel("")
        sb = self.statusBar()
        sb.addWidget(self.facts)
        sb.addWidget(self.mode_line, 1)
        sb.addPermanentWidget(self.progress_text)
        sb.addPermanentWidget(self.progress_bar)
        self.scale_map.rows.gain_changed.connect(lambda *_: self._ask())
        self.scale_map.threshold.changed.connect(self._ask)
        self.regions = LongRegions(self.scale_map, self)
        self.regions.changed.connect(self._ask)
        for plot in (self.scale_map.plot, self.traces.plot):
            plot.getPlotItem().getViewBox().sigXRangeChanged.connect(
                lambda vb, rng: self._range_moved(rng))
        self.overview.region.sigRegionChangeFinished.connect(self._overview_moved)

    # ------------------------------------------------------------------ opening

    def open_long(self, path: str, spec: tf.TransformSpec, edits=(), channel=None,
                  look: bool = True) -> None:
        """Open ``path`` in long-recording mode (its summary read back or built first);
        ``look``: offer back edits an earlier session left (when sessions are kept)."""
        self.path = path
        self.open_channel = channel
        self.base_edits = tuple(edits)
        self.facts.setText(f"{os.path.basename(path)} · long recording: preparing its summary")
        self.scale_map.wait_for("Preparing this long recording's summary: one pass over the "
                                "file, kept for the next time (progress below, right)")
        self.worker.open(path, spec, channel, self.base_edits, look)

    def reopen(self, spec: tf.TransformSpec, edits) -> None:
        """The same recording under another transform (a restored session's), with ``edits``."""
        if self.lr is not None:
            self.lr.close()
        self.lr = self.worker.recording = None
        self.worker.sweep = self.worker._sweeping = self.worker._finished = None
        self.worker.hold_saves = True       # until the restored edits are in place
        self.pending_edits = (SimpleNamespace(transform=spec, edits=tuple(edits)), None, None)
        self.open_long(self.path, spec, (), self.open_channel, look=False)

    def put_edits(self, edits) -> None:
        """Put ``edits`` in the window: band gains, the threshold and region edits in their
        controls where the window's own order gives back exactly these edits, else all of
        them as the recipe's (``base_edits``)."""
        edits = tuple(edits)
        base, gains, rule, regions = split_edits(edits, self.lr.spec.level)
        self._set_controls(gains, rule)
        self.base_edits = base
        self.regions.set_recording(self.lr, base)
        self.regions.edits = list(regions)
        if self.edits() != edits:
            self._set_controls({}, None)
            self.base_edits = edits
            self.regions.set_recording(self.lr, edits)
        self.regions.redraw()
        self._ask()

    def _set_controls(self, gains: dict, rule) -> None:
        rows, th = self.scale_map.rows, self.scale_map.threshold
        for key in rows_of(self.lr.spec.level):
            rows.set_gain(key, gains.get(key, 1.0))
        for box, value in ((th.rule, None if rule is None else rule[0]),
                           (th.shape, "soft" if rule is None else rule[1])):
            box.blockSignals(True)
            box.setCurrentIndex(max(0, box.findData(value)))
            box.blockSignals(False)

    def _opened(self, lr, how: str) -> None:
        self.lr = lr
        level = lr.spec.level
        bands = []
        for key in rows_of(level):
            lo, hi = tf.band_range_hz(key, level, lr.rate)
            bands.append((key, tf.band_name(key, level), lo, hi))
        self.scale_map.wait_for("")
        self.scale_map.rows.set_bands(bands)
        # the edit lines above, then the rows (as tall as their controls) and the time axis
        self.scale_map.set_rows([b[1] for b in bands])
        need = self.scale_map.height_needed()
        self.scale_map.setMinimumHeight(need)
        self.scale_map.setMaximumHeight(need)
        total = sum(self.splitter.sizes())
        self.splitter.setSizes([need, max(120, total - need - 80), 80])
        self.regions.set_recording(lr, self.base_edits)
        self.channel_box.blockSignals(True)
        self.channel_box.clear()
        names = ([f"ch{lr.channel}"] if lr.channel is not None
                 else [f"ch{k}" for k in range(lr.channels)])
        for k, name in enumerate(names):
            self.channel_box.addItem(f"{k}: {name}", k)
        self.channel_box.blockSignals(False)
        self.channel_box.setEnabled(lr.channels > 1)
        dur = lr.n / lr.rate
        self.facts.setText(f"{os.path.basename(lr.path)} · {lr.rate:g} Hz · {_duration(dur)} · "
                           f"{lr.channels} channel{'s' if lr.channels > 1 else ''} · "
                           f"{lr.n:,} samples".replace(",", " "))
        kept = "read from the cache" if how == "kept" else "built and kept"
        self.mode_line.setText(
            f"Long recording: shown from a summary ({kept}); exact samples when the view "
            f"spans {self.exact_most / lr.rate:.3g} s or less · {' · '.join(_words(lr.spec))}")
        self.mode_line.setToolTip(NOT_HERE)
        self.export_action.setEnabled(True)
        self.export_menu_action.setEnabled(True)
        self.save_recipe_action.setEnabled(True)
        self._draw_overview()
        if self.base_edits:
            self.put_edits(self.base_edits)      # the recipe's gains, threshold and regions
        self.show_all()                          # in their controls where that is exact
        if self.pending_edits is not None:
            recipe, path, kept = self.pending_edits
            self.pending_edits = None
            self.sessions.put_back(recipe, path, kept)
            self.worker.hold_saves = False
            self.worker.save_soon(self.edits())     # not the recording's: it has them later

    def _draw_overview(self) -> None:
        lr = self.lr
        s = lr.summary.signal[self.channel]
        times, lo, hi, _ = s.window(0, lr.n, 1200)
        self.overview.draw(times / lr.rate, lo, hi, lr.n / lr.rate)

    # ------------------------------------------------------------------ edits

    def edits(self) -> tuple:
        """The recipe's edits, then a gain per band changed here, then the threshold, then the
        region edits drawn here (after the threshold: a region never changes the noise a
        threshold reads, so drawing one costs only the view)."""
        out = list(self.base_edits)
        if self.lr is None:
            return tuple(out)
        rows = self.scale_map.rows
        for key in rows_of(self.lr.spec.level):
            g = rows.gain(key)
            if abs(g - 1.0) > 1e-12:
                levels = ("a",) if key == "a" else (key,)
                out.append(Edit("gain", levels=levels, gain=float(g)))
        rule = self.scale_map.threshold.rule.currentData()
        if rule is not None:
            out.append(Edit("threshold", levels="details", rule=rule, noise="finest",
                            shape=self.scale_map.threshold.shape.currentData()))
        out.extend(self.regions.edits)
        return tuple(out)

    # ------------------------------------------------------------------ view

    def show_all(self) -> None:
        if self.lr is not None:
            self.set_view(0, self.lr.n)

    def set_view(self, t0: int, t1: int) -> None:
        """Show samples ``t0 .. t1``."""
        lr = self.lr
        t0, t1 = max(0, int(t0)), min(lr.n, int(t1))
        self.view = (t0, max(t1, t0 + 1))
        # not by blocking the view boxes' signals: their axes follow those
        self._setting_range = True
        try:
            for plot in (self.scale_map.plot, self.traces.plot):
                plot.getPlotItem().getViewBox().setXRange(t0 / lr.rate, t1 / lr.rate,
                                                          padding=0)
        finally:
            self._setting_range = False
        self._ask()

    def _range_moved(self, rng) -> None:
        """A plot was zoomed or panned (wheel, drag): the others follow."""
        if self.lr is None or self._setting_range:
            return
        a, b = (int(round(v * self.lr.rate)) for v in rng)
        if abs(a - self.view[0]) <= 1 and abs(b - self.view[1]) <= 1:
            return          # the view as set, come back through seconds (a resize, a redraw)
        self.set_view(a, b)

    def _overview_moved(self) -> None:
        if self.lr is not None:
            a, b = self.overview.region.getRegion()
            self.set_view(int(a * self.lr.rate), int(b * self.lr.rate))

    def _channel_chosen(self, *_) -> None:
        if self.lr is not None:
            self.channel = int(self.channel_box.currentData() or 0)
            self._draw_overview()
            self._ask()

    def _columns(self) -> int:
        return max(64, int(self.scale_map.plot.getPlotItem().getViewBox().width()) or 800)

    def _ask(self) -> None:
        if self.lr is None:
            return
        self._asked_at = time.perf_counter()
        t0, t1 = self.view
        self.asked_number = self.worker.request(self.edits(), t0, t1, self._columns(),
                                                self.channel, self.exact_most)

    def _drawn(self, pic, number: int) -> None:
        rate = self.lr.rate
        self.scale_map.draw(pic, pic.start / rate, pic.stop / rate)
        self.traces.draw(pic, self.exact_most / rate)
        self.overview.mark(pic.start / rate, pic.stop / rate)
        self.picture = pic
        self.painted_number = number
        self.last_paint_s = time.perf_counter() - getattr(self, "_asked_at", time.perf_counter())
        self.painted.emit(number)

    # ------------------------------------------------------------------ export

    def export_dialog(self) -> None:
        path, _ = QFileDialog.getSaveFileName(self, "Export cleaned signal",
                                              os.path.splitext(self.path)[0] + "-cleaned.wav",
                                              "Audio (*.wav *.flac);;CSV (*.csv)")
        if path:
            # the dialog asked before replacing a file, so a chosen file may be replaced
            self.export(path, force=os.path.exists(path))

    def export(self, path: str, removed: str | None = None, subtype: str | None = None,
               force: bool = False) -> bool:
        """The current edits over the whole recording into ``path``, in the background."""
        if not self.worker.export(self.edits(), path, removed, subtype, force):
            show_error(self, "an export is already running")
            return False
        self._exporting_to = path
        self._progress(0.0, "exporting")
        return True

    def recipe(self):
        """The recipe the window applies now (its transform and edits)."""
        from scalesieve.recipe import Recipe

        return Recipe(transform=self.lr.spec, edits=self.edits())

    def save_recipe_dialog(self) -> None:
        path, _ = QFileDialog.getSaveFileName(self, "Save recipe",
                                              os.path.splitext(self.path)[0] + "-recipe.json",
                                              "Recipe (*.json)")
        if path:
            self.save_recipe(path, force=os.path.exists(path))

    def save_recipe(self, path: str, force: bool = False) -> bool:
        """Write the current recipe to ``path`` (atomically; an existing file only with force)."""
        from scalesieve import api

        recipe = self.recipe()
        try:
            api.save_recipe(recipe, path, force=force)
        except ScalesieveError as exc:
            show_error(self, exc.one_line())
            return False
        self.captured = recipe.to_json()
        self.progress_text.setText(f"recipe saved: {os.path.basename(path)}")
        return True

    def _exported(self, report: dict) -> None:
        self.captured = report["recipe"].to_json() if "recipe" in report else None
        self.progress_bar.hide()
        share = 100 * report.get("energy_removed_fraction", 0.0)
        self.progress_text.setText(f"exported {os.path.basename(self._exporting_to)} · "
                                   f"energy removed {share:.3g} %")
        self.last_export = report

    # ------------------------------------------------------------------ messages

    def _progress(self, fraction: float, text: str) -> None:
        self.progress_bar.show()
        self.progress_bar.setValue(int(1000 * max(0.0, min(1.0, fraction))))
        self.progress_text.setText(text)
        if fraction >= 1.0:
            self.progress_bar.hide()

    def _failed(self, message: str) -> None:
        self.progress_bar.hide()
        self.progress_text.setText("")
        if self.lr is None:
            self.scale_map.wait_for(f"Not opened: {message}")
            self.facts.setText(f"{os.path.basename(getattr(self, 'path', ''))} · not opened")
        show_error(self, message)

    def wait_idle(self, timeout_s: float = 600.0, sweep: bool = False) -> str | None:
        return self.worker.wait_idle(timeout_s, sweep)

    def snapshot(self, path: str, force: bool = False) -> None:
        """Write the whole window as a PNG once the view is drawn."""
        from scalesieve.io.atomic import atomic_write

        QApplication.processEvents()

        def write(tmp: str) -> None:
            if not self.grab().save(tmp, "PNG"):
                raise ScalesieveError("could not write the PNG", path)
        atomic_write(path, write, force=force)

    @reported
    def closeEvent(self, ev) -> None:
        if self.worker._exporting and not QApplication.instance().property(
                "scalesieve_quiet_errors"):
            from PySide6.QtWidgets import QMessageBox

            answer = QMessageBox.question(
                self, "Scalesieve", "An export is still running. Closing stops it; the "
                "file it writes is left as it was before. Close anyway?")
            if answer != QMessageBox.StandardButton.Yes:
                ev.ignore()
                return
        self.worker.stop()
        if self.lr is not None:
            self.lr.close()
            if self.worker.keep_sessions and not self.worker.hold_saves:
                from scalesieve import autosave

                # edits neither saved nor exported stay under File › Kept edits
                autosave.finish_session(self.lr.path, self.captured)
        super().closeEvent(ev)


def open_if_long(parent, path: str) -> bool:
    """Open ``path`` in a long-recording window when it is over the window's memory budget
    (``memory_guard.window_long``); False when it is not (the caller reads it whole)."""
    from scalesieve import memory_guard
    from scalesieve.longview.span import why_not_long

    spec = tf.TransformSpec()
    if why_not_long(spec) is not None or \
            not memory_guard.window_long(memory_guard.probe_quietly(path), transform=spec):
        return False
    w = LongWindow(keep_sessions=True)
    w.resize(parent.size())
    w.show()
    w.open_long(path, spec)
    parent.long_windows = [x for x in getattr(parent, "long_windows", []) if x.isVisible()]
    parent.long_windows.append(w)
    return True


def _duration(seconds: float) -> str:
    if seconds >= 3600:
        return f"{seconds / 3600:.3g} h"
    if seconds >= 60:
        return f"{seconds / 60:.3g} min"
    return f"{seconds:.3g} s"


def _words(spec: tf.TransformSpec) -> list:
    return [spec.kind.upper(), spec.wavelet, f"{spec.level} levels", spec.mode]


def split_edits(edits: tuple, level: int) -> tuple:
    """``(base, gains, rule, regions)`` of ``edits`` as the window's controls hold them:
    trailing region edits, before them a threshold on every detail band (``(rule,
    shape)``), before it one gain per band; the rest is the recipe's.  The window puts
    them back together in its own order (``LongWindow.edits``), checked by the caller."""
    from scalesieve.gui.long_panes import ThresholdLine

    rest = list(edits)

    def plain(e):
        return e.enabled and e.channels is None and e.bands is None
    regions = []
    while rest and rest[-1].op == "region" and plain(rest[-1]):
        regions.insert(0, rest.pop())
    rule = None
    rules = {v for _, v in ThresholdLine.RULES if v is not None}
    if rest and rest[-1].op == "threshold" and plain(rest[-1]) and rest[-1].levels == "details" \
            and rest[-1].noise == "finest" and rest[-1].rule in rules \
            and rest[-1].scale == 1.0:
        e = rest.pop()
        rule = (e.rule, e.shape)
    gains: dict = {}
    keys = set(rows_of(level))
    while rest and rest[-1].op == "gain" and plain(rest[-1]) \
            and isinstance(rest[-1].levels, tuple) and len(rest[-1].levels) == 1 \
            and rest[-1].levels[0] in keys and rest[-1].levels[0] not in gains:
        e = rest.pop()
        gains[e.levels[0]] = float(e.gain)
    return tuple(rest), gains, rule, regions
