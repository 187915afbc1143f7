"""The shared decomposition model: recording + transform + recipe -> results.

No Qt here.  The window, the command line and the Python API all hold one of
these, so the same recipe gives the same numbers everywhere.

``DecompositionModel`` (here) is the facade; the work is in the modules
beside it: ``history`` (undo and redo), ``changes`` (what listeners are
told), ``channel`` (per-channel state and its caches), ``planning`` (chains
of edits to plans), ``engine`` (apply, recompute, local synthesis, settle),
``deferred`` (owed gain passes) and ``figures`` (band table, metrics,
transients).

How edits stay cheap, what is deferred and what memory it takes: see
``engine``.
"""

from __future__ import annotations

from typing import Callable, Iterable, Sequence

import numpy as np

from scalesieve.core import transforms as tf
from scalesieve.core.recording import Recording
from scalesieve.errors import ScalesieveError  # noqa: F401  (re-exported)
from scalesieve.model import deferred as _deferred
from scalesieve.model import figures as _figures
from scalesieve.model.changes import Change, Listeners
from scalesieve.model.channel import Channel, decompose, resolve
from scalesieve.model.engine import (COMPONENT_BYTES, COMPONENT_CACHE, LOCAL_SHARE,
                                     THRESHOLDS_KEPT, Engine)
from scalesieve.model.history import EditHistory
from scalesieve.recipe import Edit, Recipe, check_against

__all__ = ["DecompositionModel", "Change", "FLUSH_STEP", "LOCAL_SHARE", "COMPONENT_CACHE",
           "COMPONENT_BYTES", "THRESHOLDS_KEPT", "Edit", "Recipe", "Recording",
           "ScalesieveError", "check_against"]

#: samples per step of a deferred pass (``flush_step``): a few milliseconds of work
FLUSH_STEP = 1 << 22


class DecompositionModel:
    """Recording, transform and recipe, with cleaned / removed / bands / metrics.

    Parameters
    ----------
    recording : Recording
        Float64 or float32 samples; the model works in the same precision.
    transform : TransformSpec, optional
        ``level=None`` chooses a level for the data (see ``default_level``).
    edits : sequence of Edit, optional
    progress : callable(fraction: float, text: str), optional
        Told how far a (re)decomposition, and the first application of the
        recipe, have got.  It may raise (for example to cancel a load); the
        exception comes out of the constructor or ``set_transform``.
    """

    def __init__(self, recording: Recording, transform: tf.TransformSpec | None = None,
                 edits: Sequence[Edit] = (), progress: Callable | None = None):
        self.recording = recording
        self.dtype = np.dtype(recording.samples.dtype)
        self._listeners = Listeners()
        self._history = EditHistory()
        self._progress = progress
        self._events = _figures.PreparedEvents()
        #: recordings of at least this many samples get their gain passes deferred
        #: (see ``flush_step``); None: never (the command line and scripts)
        self.defer_from: int | None = None
        edits = tuple(edits)
        spec = self._resolve(transform or tf.TransformSpec())
        if edits:
            self._check(edits, spec)         # a recipe that does not fit is refused first
        self._build(spec, 0.0, 0.5 if edits else 1.0)
        if edits:
            self._history.replace_current(edits)
            self._apply(edits, full=True, progress=self._stage(0.5, 1.0, "applying the recipe"))
            self._report(1.0, "ready")

    # ------------------------------------------------------------------ setup

    def _resolve(self, spec: tf.TransformSpec) -> tf.TransformSpec:
        return resolve(self.recording, spec)

    def _report(self, fraction: float, text: str) -> None:
        if self._progress:
            self._progress(fraction, text)

    def _stage(self, lo: float, hi: float, text: str):
        """A progress(fraction) for one stage, mapped into lo .. hi of the whole."""
        if not self._progress:
            return None
        return lambda f: self._progress(lo + (hi - lo) * f, text)

    def _build(self, spec: tf.TransformSpec, lo: float = 0.0, hi: float = 1.0) -> None:
        """Decompose every channel; the model changes only once all are done."""
        chans = decompose(self.recording, spec, self.dtype, self._progress, lo, hi)
        self.spec = spec
        self._engine = Engine(spec, self.recording.n, self.recording.rate, self.dtype)
        self._ch: list[Channel] = chans
        self._report(hi, "decomposed")

    def _apply(self, edits, full: bool = False, progress=None) -> Change:
        defer = self.defer_from is not None and self.recording.n >= self.defer_from
        return self._engine.apply(self._ch, edits, full, progress, defer)

    def _check(self, edits: Iterable[Edit], spec: tf.TransformSpec | None = None) -> None:
        check_against(edits, self.spec if spec is None else spec,
                      self.recording.duration_s, self.recording.channels)

    # -------------------------------------------------------------- listeners

    def add_listener(self, fn: Callable[[Change], None]) -> None:
        self._listeners.add(fn)

    def remove_listener(self, fn: Callable[[Change], None]) -> None:
        self._listeners.remove(fn)

    # ------------------------------------------------------------- transform

    @property
    def level(self) -> int:
        return int(self.spec.level)

    @property
    def band_keys(self) -> list:
        """Bands in table order: d1 ... dJ, then aJ (packet bands: frequency order)."""
        return tf.table_keys(self.spec)

    def band_name(self, key) -> str:
        return tf.band_name(key, self.level)

    def band_range_hz(self, key) -> tuple[float, float]:
        return tf.band_range_hz(key, self.level, self.recording.rate)

    def set_transform(self, spec: tf.TransformSpec) -> None:
        """Rerun the decomposition; the recipe is kept (levels must still exist)."""
        new = self._resolve(spec)
        self._check(self.edits, new)
        old = self.spec
        self._ch = []                    # let the old decomposition go before the new one
        try:
            self._build(new, 0.0, 0.5 if self.edits else 1.0)
            self._apply(self.edits, full=True,
                        progress=self._stage(0.5, 1.0, "applying the recipe"))
        except BaseException:
            # cancelled or failed half way: back to the old transform, quietly
            keep, self._progress = self._progress, None
            try:
                self._build(old)
                self._apply(self.edits, full=True)
            finally:
                self._progress = keep
            raise
        self._listeners.notify(Change("transform", list(range(self.recording.channels))))

    # ------------------------------------------------------------------ edits

    @property
    def edits(self) -> tuple[Edit, ...]:
        return self._history.current

    def recipe(self) -> Recipe:
        return Recipe(self.spec, self.edits)

    def set_edits(self, edits: Sequence[Edit], record: bool = True) -> Change:
        """Replace the whole edit list (one undo step when ``record``)."""
        edits = tuple(edits)
        self._check(edits)
        if record:
            if not self._history.record(edits):
                return Change("recipe", [])
        else:
            self._history.replace_current(edits)
        return self._applied()

    def _applied(self) -> Change:
        change = self._apply(self.edits)
        self._listeners.notify(change)
        return change

    def add_edit(self, edit: Edit) -> Change:
        return self.set_edits(self.edits + (edit,))

    def replace_edit(self, index: int, edit: Edit) -> Change:
        e = list(self.edits)
        e[index] = edit
        return self.set_edits(e)

    def remove_edit(self, index: int) -> Change:
        e = list(self.edits)
        del e[index]
        return self.set_edits(e)

    def move_edit(self, index: int, to: int) -> Change:
        e = list(self.edits)
        e.insert(to, e.pop(index))
        return self.set_edits(e)

    @property
    def can_undo(self) -> bool:
        return self._history.can_undo

    @property
    def can_redo(self) -> bool:
        return self._history.can_redo

    def undo(self) -> Change | None:
        return self._applied() if self._history.undo() else None

    def redo(self) -> Change | None:
        return self._applied() if self._history.redo() else None

    def settle(self) -> None:
        """Recompute what was updated by parts, from scratch (bit-identical to a fresh model)."""
        self._engine.settle(self._ch)

    # --------------------------------------------------------------- results

    def cleaned(self, channel: int | None = None) -> np.ndarray:
        """Cleaned signal of one channel, or all as (n, channels).

        Read it, do not write into it: until the first edit it is the
        recording's own column, and an edit may replace the array.
        """
        for ch in self._ch if channel is None else [self._ch[channel]]:
            _deferred.pay(ch)
        if channel is not None:
            return self._ch[channel].cleaned
        return np.column_stack([ch.cleaned for ch in self._ch])

    def removed(self, channel: int | None = None) -> np.ndarray:
        if channel is not None:
            return self._ch[channel].x - self.cleaned(channel)
        self.cleaned()
        return np.column_stack([ch.x - ch.cleaned for ch in self._ch])

    def original(self, channel: int) -> np.ndarray:
        return self._ch[channel].x

    def coefficients(self, channel: int, key) -> np.ndarray:
        """Original coefficients of a band."""
        return self._ch[channel].band(key, self.level)

    def edited_coefficients(self, channel: int, key, start: int | None = None,
                            stop: int | None = None) -> np.ndarray:
        """Edited coefficients of a band, or of indices ``start .. stop`` of it.

        A window costs what it holds.  The whole band is kept once asked for
        (and kept current by region edits), as a view that draws it will ask again.
        """
        return self._engine.edited(self._ch[channel], key, start, stop)

    def band_gain(self, channel: int, key) -> float | None:
        """A band's uniform gain, or None when its edits are not a uniform gain (cheap)."""
        return self._engine.band_gain(self._ch[channel], key)

    def band_gain_state(self, channel: int, key):
        """A band's edit state: a number (uniform gain) or an array of values.

        The array costs a pass over the band the first time (``band_gain`` tells
        which it is without that).
        """
        g = self.band_gain(channel, key)
        return g if g is not None else self.edited_coefficients(channel, key)

    def coefficient_times(self, channel: int, key) -> np.ndarray:
        """Time in seconds of each coefficient of a band."""
        count = self._ch[channel].lengths[tf.band_index(key, self.level)]
        return tf.coefficient_positions(key, self.spec, count) / self.recording.rate

    def band_component(self, channel: int, key, edited: bool = True) -> np.ndarray:
        """Time-domain component of one band, as edited (or original)."""
        return self._engine.band_component(self._ch[channel], key, edited)

    def band_component_span(self, channel: int, key, start: int, stop: int,
                            edited: bool = True) -> np.ndarray:
        """Samples ``start .. stop`` of a band's time-domain component.

        The same numbers as ``band_component(...)[start:stop]``; for the DWT the
        cost follows the span (local synthesis of the coefficients whose
        support reaches it), so a window can draw a zoomed view of a long
        recording without synthesising the whole band.
        """
        return self._engine.component_span(self._ch[channel], key, start, stop, edited)

    def noise_sigma(self, channel: int, key=1) -> float:
        return self._engine.sigma(self._ch[channel], key)

    def threshold_for(self, channel: int, key, edit: Edit) -> float:
        """The threshold an edit uses on a band: the one applied (for drawing it).

        For an edit in force on the band this is the lambda of its chain
        (SURE and BayesShrink look at the band as it stands when the edit
        applies); for any other edit, what it would use on the band as edited.
        """
        return self._engine.threshold_for(self._ch[channel], key, edit)

    def band_table(self, channel: int) -> list[dict]:
        """Per-band figures of the original recording (docs/reference.md ``bands --json``).

        Worked out by ``core.band_figures`` once per decomposition; every view
        (command line, band table export, Bands pane, API) reads this table.
        Returns copies: a caller may change its rows.
        """
        return _figures.band_table(self._ch[channel], self.spec, self.recording.rate,
                                   self.dtype)

    def metrics(self, channel: int) -> dict:
        """What the recipe did to one channel (see ``figures.metrics``)."""
        return _figures.metrics(self._ch[channel], self._engine, self.cleaned(channel))

    def events(self, levels=(1, 2), k: float = 5.0, kind: str | None = None,
               channels: Sequence[int] | None = None):
        """Transients (docs/reference.md ``events``), through core/events.py.

        ``kind`` is the transform that times them (default: the SWT, see
        core/events.py); wavelet, level and mode are the model's.  Returns
        ``(events, noise)`` as ``core.events.detect_channels`` does.  Prepared
        levels are kept, so a new ``k`` costs only the detection.
        """
        return _figures.events(self, self._events, levels, k, kind, channels)

    # ------------------------------------------------------- deferred passes

    def deferred(self, channel: int) -> int | None:
        """First sample of ``channel`` whose stored value still lacks a deferred pass."""
        return _deferred.first_owed(self._ch[channel])

    def flush_step(self, samples: int | None = None) -> tuple[int, int, int] | None:
        """Apply deferred passes to the next ``samples`` samples of one channel.

        Returns ``(channel, start, stop)``: samples start .. stop are now
        exact in the stored cleaned signal; None when nothing is owed.
        ``samples`` defaults to ``FLUSH_STEP``.
        """
        samples = FLUSH_STEP if samples is None else samples
        return _deferred.flush_step(self._ch, self.recording.n, samples)

    def cleaned_view(self, channel: int, start: int, stop: int) -> np.ndarray:
        """Exact cleaned samples start .. stop without paying deferred passes.

        A view of the stored signal when nothing is owed there (do not
        write into it), else a new array.
        """
        return _deferred.cleaned_view(self._ch[channel], start, stop)

    def cleaned_at(self, channel: int, index: np.ndarray) -> np.ndarray:
        """Exact cleaned samples at ``index`` (sorted or not) without paying deferred passes."""
        return _deferred.cleaned_at(self._ch[channel], index)
