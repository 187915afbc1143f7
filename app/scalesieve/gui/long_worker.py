"""The work behind the long-recording window, off the UI thread.

Three kinds of work, each in its own Python thread (NumPy and PyWavelets
release the GIL for their loops): opening (the summary read back or built,
with progress), views (the latest request wins: a burst of edits or a drag
draws only the last), and the export of the whole recording through the
streaming pipeline (with progress; written atomically).  Results come back
as Qt signals, queued to the window's thread.
"""

from __future__ import annotations

import threading
import time

from PySide6.QtCore import QObject, Signal

from scalesieve.gui.error_dialog import message_for


class LongWorker(QObject):
    opened = Signal(object, str)        # LongRecording, "kept" | "built"
    progress = Signal(float, str)       # fraction, what
    drawn = Signal(object, int)         # Picture, request number
    exported = Signal(dict)             # the streaming pipeline's report
    swept = Signal()                    # more of the cleaned trace over the whole file
    notice = Signal(str)                # one line for the status bar
    restore_found = Signal(object)      # autosave.RestoreInfo: saved edits to offer back
    failed = Signal(str)                # one line

    def __init__(self, parent=None):
        super().__init__(parent)
        self._lock = threading.Condition()
        self._request = None            # (number, edits, t0, t1, columns, channel)
        self._number = 0
        self._threads: list[threading.Thread] = []
        self._stopping = False
        self._opening = False
        self._exporting = False
        self._drawing = False
        self.recording = None
        self.sweep = None               # the latest published CleanedSweep
        self._sweeping = None           # the one running or last run
        self._finished = None           # the last one that covered the whole recording
        self._sweep_number = 0
        self._sweep_running = False
        self.last_failure: str | None = None
        #: save the edits after each change (autosave's sessions), as the main window does
        self.keep_sessions = False
        #: saved edits of this recording wait for an answer: nothing is saved over them
        self.hold_saves = False
        self.failed.connect(self._remember)

    def _remember(self, message: str) -> None:
        self.last_failure = message

    def _start(self, target, *args) -> None:
        t = threading.Thread(target=target, args=args, daemon=True)
        self._threads = [x for x in self._threads if x.is_alive()] + [t]
        t.start()

    # ---------------------------------------------------------------- opening

    def open(self, path: str, spec, channel, edits, look: bool = True) -> None:
        """Read back or build the summary of ``path``, then take ``edits``; ``look``: first
        look for saved edits an earlier session left (``restore_found``)."""
        self._opening = True
        self._start(self._open, path, spec, channel, tuple(edits), look)

    def _open(self, path, spec, channel, edits, look=True) -> None:
        from scalesieve.longview.span import open_long

        try:
            if self.keep_sessions and look:
                self._look_for_session(path)
            lr, how = open_long(path, spec, channel, progress=self.progress.emit,
                                cancelled=lambda: self._stopping)
            lr.set_edits(edits, progress=self.progress.emit)
            self._save_session(lr)
            self.recording = lr
            self.opened.emit(lr, how)
            self._start(self._prepare_noise, lr)
        except InterruptedError:
            pass
        except Exception as exc:  # noqa: BLE001 - one line to the user, never a traceback
            self.failed.emit(message_for(exc))
        finally:
            self._opening = False

    def _prepare_noise(self, lr) -> None:
        """The finest band's noise, which most thresholds read, found ahead of the first one
        (a pass to level 1, in the background; a threshold asked for meanwhile waits for it)."""
        from scalesieve.longview import cache
        from scalesieve.stream.pipeline import _Source

        wanted = [(k, 1) for k in range(lr.channels)]
        if not lr.summary.missing(wanted):
            return
        time.sleep(self.SWEEP_AFTER_S)          # the first view drawn first
        try:
            self.notice.emit("finding the finest band's noise for thresholds (in the background)")
            if lr.summary.find_medians(_Source(lr.path, lr.channel), wanted,
                                       cancelled=lambda: self._stopping):
                if lr.summary.kept_as is not None:
                    cache.keep(lr.summary)
            self.notice.emit("")
        except InterruptedError:
            pass
        except Exception as exc:  # noqa: BLE001 - as above
            self.failed.emit(message_for(exc))

    # ---------------------------------------------------------------- sessions

    def _look_for_session(self, path: str) -> None:
        """Edits an earlier session left for this recording (it did not end normally): held,
        never written over, and offered back (``restore_found``)."""
        from scalesieve import autosave
        from scalesieve.errors import ScalesieveError

        try:
            info = autosave.pending_restore(path)
        except ScalesieveError as exc:
            self.notice.emit(f"saved edits not looked for: {exc.one_line()}")
            return
        if info is not None:
            self.hold_saves = True
            self.restore_found.emit(info)

    def save_soon(self, edits=None) -> None:
        """Save the edits now in place (after a restore prompt's answer): ``edits``, the
        window's, which the recording itself takes only when the next view is drawn."""
        if self.recording is not None:
            self._save_session(self.recording, edits)

    def _save_session(self, lr, edits=None) -> None:
        from scalesieve import autosave
        from scalesieve.errors import ScalesieveError
        from scalesieve.recipe import Recipe

        if not self.keep_sessions or self.hold_saves:
            return
        edits = lr.edits if edits is None else tuple(edits)
        try:
            autosave.save_session(lr.path, Recipe(transform=lr.spec, edits=edits).to_json(),
                                  {"long_recording": True})
        except ScalesieveError as exc:
            self.notice.emit(f"edits not kept: {exc.one_line()}")

    # ---------------------------------------------------------------- views

    def request(self, edits, t0: int, t1: int, columns: int, channel: int,
                exact_most: int) -> int:
        """Ask for the view ``t0 .. t1`` with ``edits``; returns the request's number."""
        with self._lock:
            self._number += 1
            self._request = (self._number, tuple(edits), int(t0), int(t1), int(columns),
                             int(channel), int(exact_most))
            if not self._drawing:
                self._drawing = True
                self._start(self._draw_loop)
            self._lock.notify()
            return self._number

    def _draw_loop(self) -> None:
        from scalesieve.views.long_picture import picture

        while True:
            with self._lock:
                req, self._request = self._request, None
                if req is None or self._stopping:
                    self._drawing = False
                    return
            number, edits, t0, t1, columns, channel, exact_most = req
            lr = self.recording
            try:
                if edits != lr.edits:
                    lr.set_edits(edits, progress=self.progress.emit)
                    self._save_session(lr)
                pic = picture(lr, t0, t1, columns, channel, exact_most, self.sweep)
            except Exception as exc:  # noqa: BLE001 - as above
                self.failed.emit(message_for(exc))
                continue
            self.drawn.emit(pic, number)
            self._maybe_sweep(channel)

    # ---------------------------------------------------------------- the cleaned trace, wide

    #: seconds the edits must stay unchanged before the pass over the whole file starts
    SWEEP_AFTER_S = 0.6

    def _maybe_sweep(self, channel: int) -> None:
        """Start the pass for the cleaned trace of wide views, unless it runs or ran already."""
        from scalesieve.longview.sweep import CleanedSweep

        lr = self.recording
        cur = self._sweeping
        if not lr.edits or (cur is not None and cur.edits == lr.edits
                            and cur.channel == channel):
            return
        with self._lock:
            self._sweep_number += 1
            number = self._sweep_number
        s = CleanedSweep(lr, channel)
        self._sweeping = s
        self._sweep_running = True
        self._start(self._sweep, s, number)

    def _sweep(self, s, number: int) -> None:
        from scalesieve.longview.sweep import patched

        def stale() -> bool:
            return self._stopping or self._sweep_number != number

        try:
            base = self._finished
            if base is not None and base.channel == s.channel and s.edits == s.lr.edits:
                # only region edits changed since a finished pass: their stretch, at once
                got = patched(base, s.lr)
                if got is not None and not stale():
                    self._finished = self.sweep = got
                    self._sweeping = got
                    self.swept.emit()
                    return
            waited = time.monotonic() + self.SWEEP_AFTER_S
            while time.monotonic() < waited:
                if stale():
                    return
                time.sleep(0.02)

            def publish(done):
                if not stale():
                    self.sweep = done
                    if done.finished:
                        self._finished = done
                    self.swept.emit()
            s.run(stale, publish)
        except Exception as exc:  # noqa: BLE001 - as above
            self.failed.emit(message_for(exc))
        finally:
            if self._sweep_number == number:
                self._sweep_running = False

    # ---------------------------------------------------------------- export

    def export(self, edits, output: str, removed=None, subtype=None, force=False) -> bool:
        """The edits over the whole recording into ``output``; False while one runs."""
        if self._exporting or self.recording is None:
            return False
        self._exporting = True
        self._start(self._export, tuple(edits), output, removed, subtype, force)
        return True

    def _export(self, edits, output, removed, subtype, force) -> None:
        from scalesieve.stream.pipeline import clean_stream

        lr = self.recording
        try:
            report = clean_stream(lr.path, output, transform=lr.spec, edits=edits,
                                  removed=removed, subtype=subtype, force=force,
                                  channel=lr.channel, progress=self.progress.emit)
            self.exported.emit(report)
        except Exception as exc:  # noqa: BLE001 - as above
            self.failed.emit(message_for(exc))
        finally:
            self._exporting = False

    # ---------------------------------------------------------------- state

    @property
    def busy(self) -> bool:
        with self._lock:
            drawing = self._drawing or self._request is not None
        return self._opening or self._exporting or drawing

    def _waiting(self, sweep: bool) -> bool:
        return self.busy or (sweep and self._sweep_running)

    def wait_idle(self, timeout_s: float = 120.0, sweep: bool = False) -> str | None:
        """Process events until no work is in flight (with ``sweep``, the pass for wide
        views' cleaned trace too); the last failure, if any (for snapshots, scripts and
        tests: the window itself never blocks)."""
        from PySide6.QtCore import QCoreApplication, QEventLoop

        deadline = time.monotonic() + timeout_s
        while time.monotonic() < deadline:
            QCoreApplication.processEvents(QEventLoop.ProcessEventsFlag.AllEvents, 20)
            if not self._waiting(sweep):
                # what finished may have queued more (an opened recording asks for its view)
                QCoreApplication.processEvents()
                if not self._waiting(sweep):
                    return self.last_failure
            time.sleep(0.002)
        return "timed out waiting for the long recording's work"

    def stop(self) -> None:
        """Let every thread end (a summary being built stops; an export runs to its end)."""
        self._stopping = True
        with self._lock:
            self._request = None
        for t in self._threads:
            if t.is_alive() and not self._exporting:
                t.join(timeout=5.0)
