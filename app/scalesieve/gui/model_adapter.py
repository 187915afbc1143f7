"""The Qt face of the shared decomposition model.

The model knows nothing of Qt.  This adapter turns its change notices into
Qt signals, runs the heavy work (reading a file, decomposing, preparing
what the panes draw) in a worker thread, and makes rapid requests coalesce:
while one run is in flight only the latest request waits, the ones in
between are dropped.

The model is not thread-safe, so it is never used from two threads at once:
a new recording gets a new model built in the worker; a transform change
*lends* the current model to the worker (``model`` is ``None`` meanwhile
and edits are refused) and the worker hands it back re-decomposed.  The
recipe and its undo history stay in the model throughout.
"""

from __future__ import annotations

import os
import time
import traceback
from dataclasses import dataclass, field
from typing import Callable

from PySide6.QtCore import QObject, QThread, QTimer, Signal, Slot

from scalesieve import api
from scalesieve.core.recording import Recording
from scalesieve.core import transforms as tf
from scalesieve.core.transforms import TransformSpec
from scalesieve.errors import ScalesieveError
from scalesieve.gui.worker_stop import WorkerStop
from scalesieve.views.band_envelopes import FIGURES, EnvelopeThread, coefficient_list
from scalesieve.views.display_data import ChannelPictures, Superseded
from scalesieve.views.thread_priority import lower_this_thread
from scalesieve.model import FLUSH_STEP, Change, DecompositionModel
from scalesieve.recipe import check_against

#: quiet time after the last transform request before a run starts (ms)
COALESCE_MS = 120
#: pause after the last undo or redo before the result is recomputed exactly (ms)
SETTLE_MS = 300
#: recordings of at least this many samples have full passes of an edit done by a
#: sweep after the panes are drawn (an eager pass and its envelopes take over
#: about 50 ms from here on; see DecompositionModel.flush_step)
DEFER_FROM = 1 << 24
#: least time between two redraws of the traces while a sweep runs (s)
REFINE_REDRAW_S = 0.1


@dataclass
class Job:
    """One piece of work for the worker thread."""

    token: int
    kind: str                                  # "open" or "transform"
    spec: TransformSpec | None = None
    load: Callable[[], Recording] | None = None
    edits: tuple = ()
    model: DecompositionModel | None = None    # lent for "transform"
    label: str = ""
    then_edits: tuple | None = None            # "transform": the recipe to put in place


@dataclass
class Result:
    token: int
    kind: str
    model: DecompositionModel | None
    pictures: list = field(default_factory=list)
    error: str | None = None
    label: str = ""


def _fits(edits, level, rec) -> bool:
    try:
        check_against(edits, level, rec.duration_s, rec.channels)
    except ScalesieveError:
        return False
    return True


def _transform_with_edits(model: DecompositionModel, spec: TransformSpec, level,
                          edits: tuple) -> None:
    """A new transform and a new edit list, in an order the model accepts.

    ``set_transform`` keeps the edits in force, so they must fit the new depth;
    the new edits go in before or after it, whichever keeps every step valid
    (each edit-list change stays one undo step).
    """
    rec = model.recording
    check_against(edits, level, rec.duration_s, rec.channels, rec.source or None)
    if _fits(edits, model.spec, rec):
        model.set_edits(edits)
        model.set_transform(spec)
    elif _fits(model.edits, level, rec):
        model.set_transform(spec)
        model.set_edits(edits)
    else:
        model.set_edits(())
        model.set_transform(spec)
        model.set_edits(edits)


class _Worker(QObject):
    """Lives in the worker thread; does one job at a time."""

    finished = Signal(object)          # Result
    progress = Signal(int, float, str)
    built = Signal(int, object)        # token, band keys: known before the drawing is ready

    def __init__(self, cancelled: Callable[[int], bool]):
        super().__init__()
        self._cancelled = cancelled
        self._job_token = 0

    def model_progress(self, frac: float, text: str) -> None:
        # Every model made here reports through this, whichever job runs it now.
        self.progress.emit(self._job_token, 0.5 * frac, text)

    @Slot(object)
    def run(self, job: Job) -> None:
        lower_this_thread()               # the window's thread paints first
        model = job.model
        self._job_token = job.token
        try:
            def check():
                if self._cancelled(job.token):
                    raise Superseded()

            if job.kind == "open":
                self.progress.emit(job.token, 0.0, f"reading {job.label}")
                rec = job.load()
                check()
                self.progress.emit(job.token, 0.05, "decomposing")
                try:
                    early = (job.spec or TransformSpec()).resolved(rec.n)
                except ValueError:
                    early = None            # build_model says why, in one line
                if early is not None and early.basis != "best":
                    # The panes lay out their rows while the recording is decomposed.
                    self.built.emit(job.token, tf.table_keys(early))
                model = api.build_model(rec, transform=job.spec, edits=job.edits,
                                        progress=self.model_progress)
            else:
                # Check the recipe against the new depth first: a failed
                # set_transform would leave the model rebuilt without its edits.
                rec = model.recording
                try:
                    level = job.spec.resolved(rec.n)     # edits are checked against it
                except ValueError as exc:
                    raise ScalesieveError(str(exc), rec.source or None) from None
                if job.then_edits is None:
                    check_against(model.edits, level, rec.duration_s, rec.channels)
                    model.set_transform(job.spec)
                else:
                    _transform_with_edits(model, job.spec, level, job.then_edits)
            self.built.emit(job.token, list(model.band_keys))
            pictures = []
            chans = model.recording.channels
            for k in range(chans):
                def pic_progress(frac, text, k=k):
                    self.progress.emit(job.token, 0.5 + 0.5 * (k + frac) / chans, text)
                # The bands' envelopes follow in the background (band_envelopes.py).
                pictures.append(ChannelPictures(model, k, check, pic_progress,
                                                bands_later=True))
            self.finished.emit(Result(job.token, job.kind, model, pictures, label=job.label))
        except Superseded:
            self.finished.emit(Result(job.token, job.kind,
                                      model if job.kind == "transform" else None,
                                      error=None, label="superseded"))
        except ScalesieveError as exc:
            self.finished.emit(Result(job.token, job.kind, job.model, error=exc.one_line(),
                                      label=job.label))
        except MemoryError:
            self.finished.emit(Result(job.token, job.kind, job.model, label=job.label,
                                      error="not enough memory for this recording; try one "
                                            "channel or a shorter file"))
        except Exception as exc:  # a bug: a log for us, one line for the user
            from scalesieve.gui.error_dialog import write_failure_log

            where = write_failure_log(exc, traceback.format_exc())
            self.finished.emit(Result(job.token, job.kind, job.model, label=job.label,
                                      error=f"unexpected failure: {type(exc).__name__}: {exc}"
                                            f"{where}"))


class ModelAdapter(QObject):
    """Holds the current model and what the panes draw; all in the GUI thread.

    Signals
    -------
    modelReplaced : a new recording or a new decomposition is in place
    bandsKnown(list) : the bands of the run in flight (before it is in place)
    recipeChanged(object) : the model's ``Change`` after an edit, undo or redo
    busyChanged(bool) : a run started or ended
    progress(float, str) : how far the current run is
    failed(str) : a one-line message for a dialog
    notice(str) : a remark for the status bar
    """

    modelReplaced = Signal()
    bandsKnown = Signal(object)      # the band keys a run in flight will have
    recipeChanged = Signal(object)
    busyChanged = Signal(bool)
    progress = Signal(float, str)
    failed = Signal(str)
    notice = Signal(str)             # a passing remark for the status bar
    bandDrawn = Signal(int, object)  # channel, band key: its envelope has come
    figuresKnown = Signal(int)       # channel: its band figures have come (long recordings)
    tracesRefined = Signal(int)      # channel: more of its cleaned/removed envelopes are exact
    _submit = Signal(object)
    _envelope = Signal(int, int, object, object)   # generation, channel, key, envelope
    _envelopes_done = Signal(int, object)          # generation, problem or None

    def __init__(self, parent=None):
        super().__init__(parent)
        self._model: DecompositionModel | None = None
        self._lent = False
        self._pictures: list[ChannelPictures] = []
        self._token = 0
        self._cancel_below = 0           # jobs with a smaller token stop early
        self._pictures_spec = None       # the transform the pictures were made for
        self._running: Job | None = None
        self._pending: Job | None = None
        self._wanted_spec: TransformSpec | None = None
        self.label = ""
        self.last_failure: str | None = None
        self.failed.connect(self._remember_failure)
        #: new edits made in the panes apply to the shown channel only (else to all)
        self.this_channel_only = False
        self._thread = QThread()
        self._thread.setObjectName("scalesieve-worker")
        stop = self._stop = WorkerStop(self._thread)
        self._worker = _Worker(lambda token: token < self._cancel_below or stop.stopped)
        self._worker.moveToThread(self._thread)
        self._submit.connect(self._worker.run)
        self._worker.finished.connect(self._on_finished)
        self._worker.progress.connect(self._on_progress)
        self._worker.built.connect(self._on_built)
        self._thread.start()
        stop.watch(self)     # a window that goes away unclosed stops it too (worker_stop.py)
        self._bands_thread: EnvelopeThread | None = None
        self._bands_generation = 0
        #: bands whose envelopes the panes draw (open lanes): only these are made
        self._wanted: set = set()
        self._envelope.connect(self._on_envelope)
        self._envelopes_done.connect(self._on_envelopes_done)
        self._coalesce = QTimer(self)
        self._coalesce.setSingleShot(True)
        self._coalesce.setInterval(COALESCE_MS)
        self._coalesce.timeout.connect(self._start_transform)
        # After undo or redo the model's incremental result differs from a fresh
        # computation in the last bits; a pause later it is recomputed exactly.
        self._settle = QTimer(self)
        self._settle.setSingleShot(True)
        self._settle.setInterval(SETTLE_MS)
        self._settle.timeout.connect(self.settle_now)
        # Deferred full passes are paid step by step between events.
        self._sweep_timer = QTimer(self)
        self._sweep_timer.setSingleShot(True)
        self._sweep_timer.setInterval(0)
        self._sweep_timer.timeout.connect(self._sweep)
        self._refined_at = 0.0
        self._refined: set = set()
        self._pending_checks: list = []

    # ------------------------------------------------------------- reading

    @property
    def model(self) -> DecompositionModel | None:
        """The model, or ``None`` while it is lent to the worker (or none loaded)."""
        return None if self._lent else self._model

    @property
    def recording(self) -> Recording | None:
        return self._model.recording if self._model is not None else None

    @property
    def busy(self) -> bool:
        return self._running is not None or self._coalesce.isActive()

    def refining(self) -> bool:
        """A deferred full pass is owed, or traces still show a preview in part."""
        m = self.model
        if m is None:
            return False
        return (any(m.deferred(k) is not None for k in range(m.recording.channels))
                or any(p.provisional is not None for p in self._pictures))

    def bands_pending(self) -> bool:
        """Band envelopes are still being made in the background, or panes still lay out rows."""
        return self._bands_thread is not None or any(check() for check in self._pending_checks)

    def add_pending_check(self, check: Callable[[], bool]) -> None:
        """A pane's own work still to come after a model is in place (``bands_pending``)."""
        self._pending_checks.append(check)

    def pictures(self, channel: int) -> ChannelPictures | None:
        if 0 <= channel < len(self._pictures):
            return self._pictures[channel]
        return None

    # -------------------------------------------------------------- running

    def open_recording(self, load: Callable[[], Recording], transform: TransformSpec | None = None,
                       edits=(), label: str = "") -> None:
        """Read (``load()`` runs in the worker) and decompose a recording."""
        self._coalesce.stop()
        self._wanted_spec = None
        self.last_failure = None
        self._token += 1
        self._cancel_below = self._token     # a new file overtakes everything
        self._queue(Job(self._token, "open", spec=transform, load=load, edits=tuple(edits),
                        label=label))

    def request_transform(self, spec: TransformSpec) -> None:
        """Rerun with ``spec``; requests closer together than COALESCE_MS merge."""
        if self._model is None:
            return
        self._wanted_spec = spec
        if self._running is not None and self._running.kind == "transform":
            # The run in flight is out of date; a file being opened is not.
            self._cancel_below = self._running.token + 1
        was = self.busy
        self._coalesce.start()
        if not was:
            self.busyChanged.emit(True)

    def put_recipe(self, spec: TransformSpec | None, edits) -> None:
        """Put a recipe in place: its transform (if any, rerun) and its edits.

        ``spec.level`` of ``None`` is chosen for the recording.  The edits
        replace the current ones as one undoable step.
        """
        m = self.model
        if m is None or self.busy:
            self.notice.emit("recomputing: try again in a moment")
            return
        edits = tuple(edits)
        if spec is not None:
            try:
                spec = spec.resolved(m.recording.n)
            except ValueError as exc:
                self.failed.emit(ScalesieveError(str(exc), m.recording.source or None)
                                 .one_line())
                return
        if spec is None or (spec == m.spec and self._pictures_spec == spec):
            self.set_edits(edits)
            return
        self._token += 1
        self._queue(Job(self._token, "transform", spec=spec, label=self.label,
                        then_edits=edits))

    def _start_transform(self) -> None:
        spec, self._wanted_spec = self._wanted_spec, None
        if spec is None or self._model is None:
            self._idle_check()
            return
        if (not self._lent and self._running is None and spec == self._model.spec
                and self._pictures_spec == spec):
            self._idle_check()
            return
        self._token += 1
        self._queue(Job(self._token, "transform", spec=spec, label=self.label))

    def _queue(self, job: Job) -> None:
        was = self.busy
        if self._running is not None:
            self._pending = job        # latest wins: an older pending job is dropped
        else:
            self._launch(job)
        if not was:
            self.busyChanged.emit(True)

    def _launch(self, job: Job) -> None:
        self._stop_bands()        # the envelopes are for pictures about to be replaced
        self._sweep_timer.stop()  # a lent model is not touched here; a new one owes nothing
        if job.kind == "transform":
            if not self._lent:
                self._model.remove_listener(self._on_model_change)
                self._lent = True
            job.model = self._model
        self._running = job
        self._submit.emit(job)

    @Slot(int, float, str)
    def _on_progress(self, token: int, frac: float, text: str) -> None:
        if self._running is not None and token == self._running.token:
            self.progress.emit(frac, text)

    @Slot(int, object)
    def _on_built(self, token: int, keys) -> None:
        # Panes can lay out their rows while the worker still prepares the drawing.
        if self._running is not None and token == self._running.token:
            self.bandsKnown.emit(keys)

    @Slot(object)
    def _on_finished(self, res: Result) -> None:
        self._running = None
        pending, self._pending = self._pending, None
        if pending is not None:
            if pending.kind == "open":
                self._hand_back(res.model if res.kind == "transform" else None, replace=False)
            self._launch(pending)
            return
        if res.error:
            self._hand_back(res.model if res.kind == "transform" else None, replace=False)
            self._start_bands()     # the pictures in place may still miss bands
            self._idle_check()
            self.failed.emit(res.error)
            if res.kind == "transform":
                self.modelReplaced.emit()   # controls show the transform still in force
            return
        if res.label == "superseded":
            # Only a transform run can be overtaken without a pending job (by a
            # request still waiting in the coalescing timer), which will start.
            self._hand_back(res.model if res.kind == "transform" else None, replace=False)
            self._start_bands()
            self._idle_check()
            return
        self._pictures = res.pictures
        self._pictures_spec = res.model.spec
        if res.kind == "open":
            self.label = res.label
        self._hand_back(res.model, replace=True)
        self._idle_check()
        self._wanted = set()
        self.modelReplaced.emit()        # the panes say which envelopes they draw
        if self._bands_thread is None:
            self._start_bands()

    # ------------------------------------------------- background envelopes

    def want_envelopes(self, keys) -> None:
        """Bands a pane draws (an open lane's): their envelopes are made when missing.

        Only these are made: a band's envelope is a synthesis of the whole band
        (64 packet bands of 10 M samples took seconds), and a closed lane draws none.
        """
        new = set(keys) - self._wanted
        if not new:
            return
        self._wanted |= new
        if self._bands_thread is None and self._running is None:
            self._start_bands()

    def _start_bands(self) -> None:
        m = self._model
        self._stop_bands()
        if m is None or self._lent:
            return
        jobs = []
        for pic in self._pictures:
            coeffs = coefficient_list(m, pic.channel)
            if not pic.stats:
                # a long recording: the model's band table, made once however
                # many threads ask (the Scale map's row headers ask too)
                jobs.append((pic.channel, FIGURES,
                             lambda ch=pic.channel: m.band_table(ch)))
            for key in pic.missing_bands():
                if key in self._wanted:
                    jobs.append((pic.channel, key, coeffs, m.spec, pic.n, pic.block))
        if not jobs:
            return
        self._bands_generation += 1
        gen = self._bands_generation
        self._bands_thread = EnvelopeThread(
            jobs, lambda ch, key, env: self._envelope.emit(gen, ch, key, env),
            lambda problem: self._envelopes_done.emit(gen, problem))
        self._stop.bands = self._bands_thread
        self._bands_thread.start()

    def _stop_bands(self) -> None:
        t, self._bands_thread = self._bands_thread, None
        self._bands_generation += 1      # whatever it still sends is dropped
        if t is not None:
            t.stop()

    @Slot(int, int, object, object)
    def _on_envelope(self, gen: int, channel: int, key, env) -> None:
        if gen != self._bands_generation or self._lent:
            return
        pic = self.pictures(channel)
        if pic is None:
            return
        if key == FIGURES:
            pic.put_figures(env)
            self.figuresKnown.emit(channel)
            return
        pic.put_unit(self._model, key, env)
        self.bandDrawn.emit(channel, key)

    @Slot(int, object)
    def _on_envelopes_done(self, gen: int, problem) -> None:
        if gen != self._bands_generation:
            return
        self._bands_thread = None
        if problem:
            self.failed.emit(problem)
        elif any(key in self._wanted for pic in self._pictures for key in pic.missing_bands()):
            self._start_bands()      # lanes opened while it worked

    def _hand_back(self, model: DecompositionModel | None, replace: bool) -> None:
        if model is None:
            if self._lent:       # a lent model is never lost
                self._lent = False
                self._model.add_listener(self._on_model_change)
            return
        if self._model is not None and self._model is not model and not self._lent:
            self._model.remove_listener(self._on_model_change)
        if replace or self._lent:
            self._model = model
        self._lent = False
        self._model.defer_from = DEFER_FROM
        self._model.add_listener(self._on_model_change)
        self._kick_sweep()

    def _remember_failure(self, message: str) -> None:
        self.last_failure = message

    def _idle_check(self) -> None:
        if not self.busy:
            self.busyChanged.emit(False)

    def wait_idle(self, timeout_s: float = 120.0, bands: bool = True) -> str | None:
        """Process events until no run is in flight; the last failure message, if any.

        Also until every deferred pass is paid, and with ``bands`` until
        every band's envelope has come.  For
        snapshots, scripts and tests; the window itself never blocks.
        """
        from PySide6.QtCore import QCoreApplication, QEventLoop

        deadline = time.monotonic() + timeout_s
        def waiting() -> bool:
            return self.busy or self.refining() or (bands and self.bands_pending())

        while waiting() and time.monotonic() < deadline:
            QCoreApplication.processEvents(QEventLoop.ProcessEventsFlag.AllEvents, 20)
            time.sleep(0.002)
        QCoreApplication.processEvents()
        if waiting():
            return "timed out waiting for the model"
        return self.last_failure

    def shutdown(self) -> None:
        """Stop the worker threads and wait for them (the window is closing)."""
        self._coalesce.stop()
        self._stop_bands()
        self._token += 1
        self._cancel_below = self._token
        self._stop.stop(10000)

    # ---------------------------------------------------------------- edits

    def _on_model_change(self, change) -> None:
        m = self._model
        for pic in self._pictures:
            pic.update(m, change)
        self.recipeChanged.emit(change)
        self._kick_sweep()

    # ------------------------------------------------------ deferred passes

    def _kick_sweep(self) -> None:
        if not self._sweep_timer.isActive() and self.refining():
            self._refined_at = time.monotonic()
            self._sweep_timer.start()

    def _sweep(self) -> None:
        """Pay one step of the model's deferred passes; make its envelopes exact."""
        m = self.model
        step = None if m is None else m.flush_step()
        if step is None and m is not None:
            # Nothing owed (paid by the sweep, or at once by a reader such as an
            # export): drawings that still show a preview are made exact.
            for pic in self._pictures:
                if pic.provisional is not None:
                    a = pic.provisional[0]
                    step = pic.channel, a, min(pic.provisional[1], a + FLUSH_STEP)
                    break
        if step is not None:
            k, a, b = step
            pic = self.pictures(k)
            if pic is not None:
                pic.refine(m, a, b)
            self._refined.add(k)
            self._sweep_timer.start()
        now = time.monotonic()
        if step is None or now - self._refined_at >= REFINE_REDRAW_S:
            self._refined_at = now
            refined, self._refined = self._refined, set()
            for k in sorted(refined):
                self.tracesRefined.emit(k)

    def _edit(self, fn, *args) -> bool:
        m = self.model
        if m is None or self.busy:
            # Not an error: the panes are greyed meanwhile; say why in passing.
            self.notice.emit("recomputing: the edit was not made; try again in a moment")
            return False
        try:
            fn(m, *args)
        except ScalesieveError as exc:
            self.failed.emit(exc.one_line())
            return False
        return True

    def add_edit(self, edit) -> bool:
        return self._edit(lambda m, e: m.add_edit(e), edit)

    def replace_edit(self, index: int, edit) -> bool:
        return self._edit(lambda m, i, e: m.replace_edit(i, e), index, edit)

    def remove_edit(self, index: int) -> bool:
        return self._edit(lambda m, i: m.remove_edit(i), index)

    def move_edit(self, index: int, to: int) -> bool:
        return self._edit(lambda m, i, j: m.move_edit(i, j), index, to)

    def set_edits(self, edits) -> bool:
        return self._edit(lambda m, e: m.set_edits(tuple(e)), edits)

    def undo(self) -> bool:
        ok = self._edit(lambda m: m.undo())
        if ok:
            self._settle.start()
        return ok

    def redo(self) -> bool:
        ok = self._edit(lambda m: m.redo())
        if ok:
            self._settle.start()
        return ok

    @property
    def settle_pending(self) -> bool:
        return self._settle.isActive()

    def settle_now(self) -> None:
        """Recompute the cleaned signal exactly (as a fresh model would have it)."""
        self._settle.stop()
        m = self.model
        if m is None or self.busy:
            return
        m.settle()
        rec = m.recording
        self._on_model_change(Change("recipe", list(range(rec.channels)), [], (0, rec.n)))

    def edit_channels(self, channel: int):
        """The ``channels`` a new edit made on ``channel`` gets (``None``: all)."""
        rec = self.recording
        if not self.this_channel_only or rec is None or rec.channels == 1:
            return None
        return (int(channel),)

    @property
    def edits(self) -> tuple:
        return self._model.edits if self._model is not None else ()

    @property
    def can_undo(self) -> bool:
        m = self.model
        return bool(m and m.can_undo and not self.busy)

    @property
    def can_redo(self) -> bool:
        m = self.model
        return bool(m and m.can_redo and not self.busy)

    @property
    def source_path(self) -> str:
        rec = self.recording
        return rec.source if rec is not None and rec.source else ""

    def source_name(self) -> str:
        p = self.source_path
        return os.path.basename(p) if p else (self.label or "")
