"""The shared decomposition model: recording + transform + recipe -> results.

No Qt here.  The window, the command line and the Python API all hold one of
these, so the same recipe gives the same numbers everywhere.

How edits stay cheap (the inverse transform is linear):

* the cleaned signal is kept as ``original - inverse(c - e)`` where ``c``
  are the original coefficients and ``e`` the edited ones, so an empty
  recipe gives the input back exactly (it *is* the input until the first
  edit) and untouched spans stay untouched;
* no edited copy of a band is kept: a band's state is its chain of edits,
  and ``e`` is worked out from ``c`` where it is needed, block by block
  (thresholds that look at the whole band are worked out once and kept);
* an edit changes the chains of some bands only; each changed band adds the
  inverse of its own change to the cleaned signal;
* a gain change multiplies what the rest of a band's chain makes, so the
  cleaned signal moves by a multiple of that part's time-domain component,
  which is cached (bands moved by the same factor share one component):
  one pass over the signal;
* a region edit changes a window of coefficients; its effect is confined to
  their support and computed by local synthesis, so its cost follows the
  window, not the recording;
* a change that would need two or more syntheses (a threshold over all
  details) is one inverse transform, its finest level written in blocks
  straight into the cleaned signal.

``settle()`` recomputes everything from scratch in one inverse transform, so
exports give bit-identical numbers to a fresh model (the command line).

A window may ask for full passes to be *deferred* (``defer_from``): on a
long recording a gain change then only records what it adds to the cleaned
signal (a factor times a cached component), and ``flush_step`` applies it
piece by piece while the window stays free to draw.  Meanwhile
``cleaned_view`` and ``cleaned_at`` give exact samples of any span or
positions, and every other reader (``cleaned``, ``removed``, ``metrics``,
exports) first applies whatever is still owed: the numbers never depend on
how far the passes have got.

Memory, for a DWT of one channel of n samples of b bytes: the recording's
own column (not copied), the coefficients (about n b), the cleaned signal
(n b, from the first edit on), at most ``COMPONENT_CACHE`` cached components (n b each, and only one
when two would pass ``COMPONENT_BYTES``) and, during an edit, about n b of
temporaries.  The working precision is the recording's: float32 samples
give float32 coefficients and half the memory (see docs/performance.md).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable, Iterable, Sequence

import numpy as np

from scalesieve.core import band_figures as bf
from scalesieve.core import edits as ed
from scalesieve.core import metrics as mt
from scalesieve.core import thresholds as th
from scalesieve.core import transforms as tf
from scalesieve.core.recording import Recording
from scalesieve.errors import ScalesieveError
from scalesieve.recipe import Edit, Recipe, check_against

#: below this share of a band's length a changed window is synthesised locally
LOCAL_SHARE = 0.125
#: band components cached per channel for fast gain changes, at most ...
COMPONENT_CACHE = 2
#: ... and more than one only while they fit in this many bytes per channel
COMPONENT_BYTES = 64 << 20
#: thresholds kept per band: keyed by the chain up to each edit (a prefix tree,
#: ``core.edits.ThresholdMemo``); beyond the current chain, this many steps of
#: other chains (undo, redo, a slider's earlier values) before they are forgotten
THRESHOLDS_KEPT = 64
#: samples per step of a deferred pass (``flush_step``): a few milliseconds of work
FLUSH_STEP = 1 << 22


@dataclass
class _Owed:
    """cleaned[start:] still lacks factor * component[start:] (a deferred gain pass)."""

    factor: float
    component: np.ndarray
    start: int = 0


@dataclass
class Change:
    """What a listener is told.  ``span`` is the changed sample range, None = all."""

    kind: str                        # "transform", "recipe"
    channels: list[int]
    bands: list = field(default_factory=list)
    span: tuple[int, int] | None = None


@dataclass
class _Plan:
    """How one band gets from its old chain to its new one."""

    kind: str                        # "none", "gain", "window", "band"
    key: object
    old: tuple
    new: tuple
    shape: tuple = ()                # "gain": the chain part the gain multiplies
    factor: float = 0.0              # "gain": new gain - old gain
    window: tuple[int, int] = (0, 0)  # "window": coefficient indices k0, k1


class _Channel:
    """Per-channel coefficients, chains and the cleaned signal."""

    def __init__(self, x: np.ndarray, spec: tf.TransformSpec, dtype, progress=None):
        self.x = x                       # the recording's column: a view, never written
        self.coeffs = tf.forward(x, spec, dtype=dtype, progress=progress)
        self.lengths = [c.shape[0] for c in self.coeffs]
        self.chains: dict = {}           # key -> tuple of edits now applied to the band
        # With no edit the cleaned signal is the recording itself; it gets its
        # own array at the first edit (see _own_cleaned): a load touches a
        # third less memory.
        self.cleaned = x
        self.components: dict = {}       # ((key, shape), ...) -> time component (LRU)
        self.values: dict = {}           # key -> edited values, kept once someone asked
        self.thresholds: dict = {}       # key -> ThresholdMemo (chain up to each edit -> lambda)
        self.incremental = False         # cleaned was updated by parts since the last full pass
        self.owed: list[_Owed] = []      # deferred gain passes (see flush_step)
        self.contexts: dict = {}         # key -> BandContext
        self._positions: dict = {}
        self._sigma: dict = {}
        self.figures: list | None = None    # band_table of the original, once asked
        self.metric_facts: dict = {}     # figures of the original that metrics reuse

    def band(self, key, level):
        return self.coeffs[tf.band_index(key, level)]


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
        self._listeners: list[Callable[[Change], None]] = []
        self._history: list[tuple[Edit, ...]] = [()]
        self._pos = 0
        self._progress = progress
        #: recordings of at least this many samples get their gain passes deferred
        #: (see ``flush_step``); None: never (the command line and scripts)
        self.defer_from: int | None = None
        edits = tuple(edits)
        spec = self._resolve(transform or tf.TransformSpec())
        if edits:
            # a recipe that does not fit is refused before any work
            self._check(edits, spec)
        self._build(spec, 0.0, 0.5 if edits else 1.0)
        if edits:
            self._history[0] = edits
            self._apply(edits, full=True, progress=self._stage(0.5, 1.0, "applying the recipe"))
            self._report(1.0, "ready")

    # ------------------------------------------------------------------ setup

    def _resolve(self, spec: tf.TransformSpec) -> tf.TransformSpec:
        try:
            spec = spec.resolved(self.recording.n)
            if spec.kind == "packet" and spec.basis == "best":
                # one tiling for every channel: the costs of the channels add up
                from dataclasses import replace

                from scalesieve.core import packets as wp

                cols = [self.recording.samples[:, k] for k in range(self.recording.channels)]
                spec = replace(spec, basis=wp.best_basis(cols, spec.wavelet, spec.mode,
                                                         spec.level, spec.cost))
            return spec
        except ValueError as exc:
            raise ScalesieveError(str(exc), self.recording.source or None) from None

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
        total = self.recording.channels
        chans = []
        for k in range(total):
            a = lo + (hi - lo) * k / total
            b = lo + (hi - lo) * (k + 1) / total
            self._report(a, f"decomposing channel {k + 1} of {total}")
            chans.append(_Channel(self.recording.samples[:, k], spec, self.dtype,
                                  self._stage(a, b, f"decomposing channel {k + 1} of {total}")))
        self.spec = spec
        self._ch: list[_Channel] = chans
        self._report(hi, "decomposed")

    def _ctx(self, ch: _Channel, key) -> ed.BandContext:
        """What edits need to know about a band; made once per band and transform."""
        ctx = ch.contexts.get(key)
        if ctx is None:
            count = ch.lengths[tf.band_index(key, self.spec.level)]
            spec = self.spec
            spans: dict = {}

            def span(lo, hi):
                # every plan and every block asks again for the same regions
                sl = spans.get((lo, hi))
                if sl is None:
                    if len(spans) > 256:
                        spans.clear()
                    sl = spans[(lo, hi)] = tf.coefficient_slice(key, spec, count, lo, hi)
                return sl

            ctx = ch.contexts[key] = ed.BandContext(
                key=key, n_samples=self.recording.n, rate=self.recording.rate,
                positions=lambda: self._positions(ch, key),
                sigma_finest=(lambda: self._sigma(ch, "finest")) if spec.kind == "packet"
                else (lambda: self._sigma(ch, 1) * th.white_noise_gain(spec.kind, key, spec.level)),
                sigma_level=lambda: self._sigma(ch, key),
                span=span)
        return ctx

    def _positions(self, ch: _Channel, key) -> np.ndarray:
        if key not in ch._positions:
            count = ch.lengths[tf.band_index(key, self.spec.level)]
            ch._positions[key] = tf.coefficient_positions(key, self.spec, count)
        return ch._positions[key]

    def _sigma(self, ch: _Channel, key) -> float:
        # Noise comes from the original coefficients: earlier edits in the
        # recipe do not change what the recording's noise is.
        if key not in ch._sigma:
            if key == "finest":
                # packet bands: sigma of the level-1 detail, as for the DWT (node "d")
                from scalesieve.core import packets as wp

                d1 = wp.finest_detail(ch.x, self.spec.wavelet, self.spec.mode)
                ch._sigma[key] = _mad_sigma(d1.astype(self.dtype, copy=False))
            else:
                ch._sigma[key] = _mad_sigma(ch.band(key, self.spec.level))
        return ch._sigma[key]

    # -------------------------------------------------------------- listeners

    def add_listener(self, fn: Callable[[Change], None]) -> None:
        self._listeners.append(fn)

    def remove_listener(self, fn: Callable[[Change], None]) -> None:
        if fn in self._listeners:
            self._listeners.remove(fn)

    def _notify(self, change: Change) -> None:
        for fn in list(self._listeners):
            fn(change)

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
        self._notify(Change("transform", list(range(self.recording.channels))))

    # ------------------------------------------------------------------ edits

    @property
    def edits(self) -> tuple[Edit, ...]:
        return self._history[self._pos]

    def recipe(self) -> Recipe:
        return Recipe(self.spec, self.edits)

    def _check(self, edits: Iterable[Edit], spec: tf.TransformSpec | None = None) -> None:
        check_against(edits, self.spec if spec is None else spec,
                      self.recording.duration_s, self.recording.channels)

    def set_edits(self, edits: Sequence[Edit], record: bool = True) -> Change:
        """Replace the whole edit list (one undo step when ``record``)."""
        edits = tuple(edits)
        self._check(edits)
        if record:
            if edits == self.edits:
                return Change("recipe", [])
            del self._history[self._pos + 1:]
            self._history.append(edits)
            self._pos += 1
        else:
            self._history[self._pos] = edits
        change = self._apply(edits)
        self._notify(change)
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
        item = e.pop(index)
        e.insert(to, item)
        return self.set_edits(e)

    @property
    def can_undo(self) -> bool:
        return self._pos > 0

    @property
    def can_redo(self) -> bool:
        return self._pos < len(self._history) - 1

    def undo(self) -> Change | None:
        if not self.can_undo:
            return None
        self._pos -= 1
        change = self._apply(self.edits)
        self._notify(change)
        return change

    def redo(self) -> Change | None:
        if not self.can_redo:
            return None
        self._pos += 1
        change = self._apply(self.edits)
        self._notify(change)
        return change

    # ------------------------------------------------------------ the engine

    def _chains(self, edits, channel: int) -> dict:
        """Every band's chain: the edits that apply to it, in recipe order."""
        chains: dict = {key: [] for key in tf.spec_keys(self.spec)}
        for e in edits:
            if e.applies_to(channel):
                for key in dict.fromkeys(e.band_keys(self.spec)):
                    if key in chains:
                        chains[key].append(e)
        return {key: tuple(v) for key, v in chains.items()}

    def _apply(self, edits: Sequence[Edit], full: bool = False, progress=None) -> Change:
        """Bring every band to ``edits``; ``full`` recomputes from scratch."""
        n = self.recording.n
        touched_bands: set = set()
        span_lo, span_hi = None, None
        channels = []
        for k, ch in enumerate(self._ch):
            changed = [(key, chain) for key, chain in self._chains(edits, k).items()
                       if full or ch.chains.get(key, ()) != chain]
            if not changed:
                continue
            channels.append(k)
            touched_bands.update(key for key, _ in changed)
            plans = [] if full else self._plans(ch, changed)
            groups = self._gain_groups(plans or [])
            if (plans is None or full
                    or self._syntheses(plans) + sum(g not in ch.components for g in groups) >= 2):
                # two syntheses or more: one inverse transform is cheaper
                for key, chain in changed:
                    self._set_chain(ch, key, chain)
                part = None if progress is None else (
                    lambda f, k=k: progress((k + f) / len(self._ch)))
                self._recompute(ch, part)
                span_lo, span_hi = 0, n
                continue
            ch.incremental = True
            self._own_cleaned(ch)
            spans = [self._gain(ch, members, factor) for members, factor in groups.items()]
            windows = [p for p in plans if p.kind == "window"]
            if windows:
                spans.append(self._windows(ch, windows))
            for p in plans:
                if p.kind == "band":
                    spans.append(self._band(ch, p))
                if p.kind != "window":
                    ch.values.pop(p.key, None)
                ch.chains[p.key] = p.new
            if not any(ch.chains.values()):
                # every edit undone: the recording exactly, not it plus round-off
                self._recompute(ch)
            for span in spans:
                if span is not None:
                    span_lo = span[0] if span_lo is None else min(span_lo, span[0])
                    span_hi = span[1] if span_hi is None else max(span_hi, span[1])
        span = None if span_lo is None else (int(span_lo), int(span_hi))
        return Change("recipe", channels, sorted(touched_bands, key=str), span)

    def _plans(self, ch: _Channel, changed: list) -> list[_Plan] | None:
        """Plans for the changed bands, or None as soon as two would need a synthesis.

        Two syntheses or more cost more than one inverse transform of everything.
        Gain changes are counted after, by the components they would share.
        """
        plans: list[_Plan] = []
        for key, chain in changed:
            plans.append(self._plan(ch, key, chain))
            if self._syntheses(plans[-1:]) and self._syntheses(plans) >= 2:
                return None
        return plans

    def _syntheses(self, plans: list[_Plan]) -> int:
        """How many of these plans synthesise a whole band (gain changes not counted)."""
        local = self.spec.kind in tf.LOCAL_KINDS     # the SWT has no local synthesis
        return sum(p.kind == "band" or (p.kind == "window" and not local) for p in plans)

    def _set_chain(self, ch: _Channel, key, chain: tuple) -> None:
        ch.chains[key] = chain
        ch.values.pop(key, None)

    def _plan(self, ch: _Channel, key, chain: tuple) -> _Plan:
        """Cheapest way from a band's chain to ``chain`` (nothing is computed yet)."""
        old = ch.chains.get(key, ())
        ctx = self._ctx(ch, key)
        shape_old, gain_old = ed.split_gain(old, ctx)
        shape_new, gain_new = ed.split_gain(chain, ctx)
        if shape_old == shape_new:
            if gain_new == gain_old:
                return _Plan("none", key, old, chain)
            return _Plan("gain", key, old, chain, shape=shape_new, factor=gain_new - gain_old)
        window = self._changed_window(ch, key, old, chain, ctx)
        if window is not None:
            kind = "window" if window[1] > window[0] else "none"
            return _Plan(kind, key, old, chain, window=window)
        return _Plan("band", key, old, chain)

    @staticmethod
    def _gain_groups(plans: list[_Plan]) -> dict:
        """Gain plans that move by the same factor share one component."""
        by_factor: dict = {}
        for p in plans:
            if p.kind == "gain":
                by_factor.setdefault(p.factor, []).append((p.key, p.shape))
        return {tuple(sorted(m, key=lambda ks: str(ks[0]))): f for f, m in by_factor.items()}

    def _changed_window(self, ch: _Channel, key, old_chain: tuple, chain: tuple, ctx):
        """Coefficient window when the chains differ by one region edit and nothing else.

        Outside the region both chains give the same values when their
        thresholds are the same numbers (always so for universal, minimax
        and manual ones; BayesShrink and SURE after the region see it).
        """
        p = 0
        while p < min(len(old_chain), len(chain)) and old_chain[p] == chain[p]:
            p += 1
        s = 0
        while (s < min(len(old_chain), len(chain)) - p
               and old_chain[len(old_chain) - 1 - s] == chain[len(chain) - 1 - s]):
            s += 1
        mid_old = old_chain[p:len(old_chain) - s]
        mid_new = chain[p:len(chain) - s]
        if len(mid_old) > 1 or len(mid_new) > 1 or not (mid_old or mid_new):
            return None
        if any(e.op != "region" for e in mid_old + mid_new):
            return None
        if self._lams(ch, key, old_chain) != self._lams(ch, key, chain):
            return None
        sls = [sl for sl in (ed.region_slice(e, ctx) for e in mid_old + mid_new)
               if sl.stop > sl.start]
        if not sls:
            return 0, 0
        return min(sl.start for sl in sls), max(sl.stop for sl in sls)

    def _lams(self, ch: _Channel, key, chain: tuple) -> tuple:
        cache = ch.thresholds.get(key)
        if cache is None:
            cache = ch.thresholds[key] = ed.ThresholdMemo()
        lams = ed.chain_thresholds(ch.band(key, self.level), chain, self._ctx(ch, key), cache)
        if cache.nodes > 2 * len(chain) + THRESHOLDS_KEPT:
            cache.keep_only(chain)      # memory follows the recipe's length, not its history
        return lams

    def _values(self, ch: _Channel, key, chain: tuple, k0: int = 0, k1: int | None = None,
                lams: tuple | None = None) -> np.ndarray:
        """Edited values of coefficients k0 .. k1 of a band under ``chain``."""
        c = ch.band(key, self.level)
        k1 = c.shape[0] if k1 is None else k1
        if lams is None:
            lams = self._lams(ch, key, chain)
        v = ed.chain_values(c[k0:k1], chain, self._ctx(ch, key), lams, k0)
        return v if isinstance(v, np.ndarray) else c[k0:k1] * v

    def _values_full(self, ch: _Channel, key, chain: tuple | None = None,
                     keep: bool = False) -> np.ndarray:
        """All edited values of a band, made block by block (no full-size temporaries)."""
        current = chain is None or chain == ch.chains.get(key, ())
        if current and key in ch.values:
            return ch.values[key]
        chain = ch.chains.get(key, ()) if chain is None else chain
        c = ch.band(key, self.level)
        out = np.empty_like(c)
        lams = self._lams(ch, key, chain)
        for b0, b1 in _blocks(c.shape[0]):
            out[b0:b1] = self._values(ch, key, chain, b0, b1, lams)
        if keep and current:
            ch.values[key] = out
        return out

    def _removed_band(self, ch: _Channel, key):
        """``c - e`` of a band under its chain, or None when the band is untouched."""
        c = ch.band(key, self.level)
        chain = ch.chains.get(key, ())
        ctx = self._ctx(ch, key)
        shape, gain = ed.split_gain(chain, ctx)
        if not shape:
            return None if gain == 1.0 else c * (1.0 - gain)
        kept = ch.values.get(key)
        if kept is not None:
            return c - kept
        if c.shape[0] <= tf.BLOCK:
            # one block: the chain in one go, its thresholds found on the way
            return c - ed.apply_chain(c, chain, ctx)
        r = np.empty_like(c)
        lams = self._lams(ch, key, chain)
        for b0, b1 in _blocks(c.shape[0]):
            np.subtract(c[b0:b1], self._values(ch, key, chain, b0, b1, lams), out=r[b0:b1])
        return r

    def _own_cleaned(self, ch: _Channel) -> None:
        """Give the cleaned signal its own array before it is written (never the recording)."""
        if ch.cleaned is ch.x:
            ch.cleaned = np.array(ch.x, dtype=self.dtype)

    def _recompute(self, ch: _Channel, progress=None) -> None:
        """cleaned = x - inverse(c - e) in one inverse transform."""
        ch.incremental = False
        ch.owed = []                     # worked out afresh: nothing is owed any more
        keys = tf.spec_keys(self.spec)
        if not any(ch.chains.get(key) for key in keys):
            if ch.cleaned is not ch.x and ch.cleaned.shape == ch.x.shape:
                # No edit left (all undone): the recording exactly, in the array the
                # channel owns already, so that the next edit does not have to
                # allocate and fill a new one (a settle runs after a pause; an edit
                # should cost what it changes).
                np.copyto(ch.cleaned, ch.x)
            else:
                ch.cleaned = ch.x            # never edited: the recording itself
            if progress:
                progress(1.0)
            return
        if ch.cleaned is ch.x:
            ch.cleaned = np.empty(self.recording.n, dtype=self.dtype)
        total = len(keys)

        def band(i):
            if progress:
                progress(i / total)
            return self._removed_band(ch, keys[i])

        tf.inverse_into(band, ch.lengths, self.spec, self.recording.n, ch.cleaned, base=ch.x)
        if progress:
            progress(1.0)

    def _cache_limit(self) -> int:
        size = self.recording.n * self.dtype.itemsize
        return max(1, min(COMPONENT_CACHE, COMPONENT_BYTES // max(size, 1)))

    def _group_component(self, ch: _Channel, members: tuple) -> np.ndarray:
        """Time component of bands together, each as its ``shape`` chain makes it."""
        comp = ch.components.pop(members, None)
        if comp is None:
            spare = None
            while ch.components and len(ch.components) >= self._cache_limit():
                # make room first, and write the new component over the old one:
                # cached components never leave the model (callers get products)
                spare = ch.components.pop(next(iter(ch.components)))
                if any(o.component is spare for o in ch.owed):
                    self._pay(ch)        # what a deferred pass still reads is written over
            level = self.level
            parts = {tf.band_index(key, level): (key, shape) for key, shape in members}

            def band(i):
                if i not in parts:
                    return None
                key, shape = parts[i]
                return ch.band(key, level) if not shape else self._values_full(ch, key, shape)

            comp = spare if spare is not None else np.empty(self.recording.n, dtype=self.dtype)
            del spare
            tf.inverse_into(band, ch.lengths, self.spec, self.recording.n, comp)
        ch.components[members] = comp          # most recently used last
        return comp

    def _component(self, ch: _Channel, key) -> np.ndarray:
        """Unit-gain time component of a band (the original coefficients alone)."""
        return self._group_component(ch, ((key, ()),))

    def _gain(self, ch: _Channel, members: tuple, factor: float):
        # cleaned = x - (1 - gain) * component, so it moves by (new - old) * component
        comp = self._group_component(ch, members)
        n = self.recording.n
        if self.defer_from is not None and n >= self.defer_from:
            for owed in ch.owed:
                if owed.component is comp and owed.start == 0:
                    owed.factor += factor
                    break
            else:
                ch.owed.append(_Owed(float(factor), comp))
            return 0, n
        _axpy(factor, comp, ch.cleaned)
        return 0, n

    # ------------------------------------------------------- deferred passes

    def _pay(self, ch: _Channel) -> None:
        """Apply everything a channel's cleaned signal is owed."""
        for owed in ch.owed:
            _axpy(owed.factor, owed.component[owed.start:], ch.cleaned[owed.start:])
        ch.owed = []

    def deferred(self, channel: int) -> int | None:
        """First sample of ``channel`` whose stored value still lacks a deferred pass."""
        owed = self._ch[channel].owed
        return min(o.start for o in owed) if owed else None

    def flush_step(self, samples: int | None = None) -> tuple[int, int, int] | None:
        """Apply deferred passes to the next ``samples`` samples of one channel.

        Returns ``(channel, start, stop)``: samples start .. stop are now
        exact in the stored cleaned signal; None when nothing is owed.
        ``samples`` defaults to ``FLUSH_STEP``.
        """
        samples = FLUSH_STEP if samples is None else samples
        for k, ch in enumerate(self._ch):
            if not ch.owed:
                continue
            a = min(o.start for o in ch.owed)
            b = min(self.recording.n, a + int(samples))
            for o in ch.owed:
                if o.start == a:
                    _axpy(o.factor, o.component[a:b], ch.cleaned[a:b])
                    o.start = b
            ch.owed = [o for o in ch.owed if o.start < self.recording.n]
            return k, a, b
        return None

    def cleaned_view(self, channel: int, start: int, stop: int) -> np.ndarray:
        """Exact cleaned samples start .. stop without paying deferred passes.

        A view of the stored signal when nothing is owed there (do not
        write into it), else a new array.
        """
        ch = self._ch[channel]
        owed = [o for o in ch.owed if o.start < stop]
        y = ch.cleaned[start:stop]
        if not owed:
            return y
        y = y.copy()
        for o in owed:
            a = max(start, o.start)
            y[a - start:] += o.factor * o.component[a:stop]
        return y

    def cleaned_at(self, channel: int, index: np.ndarray) -> np.ndarray:
        """Exact cleaned samples at ``index`` (sorted or not) without paying deferred passes."""
        ch = self._ch[channel]
        index = np.asarray(index, dtype=np.int64)
        y = ch.cleaned[index]
        for o in ch.owed:
            if o.start == 0:             # owed everywhere (the usual case): no mask
                y += o.factor * o.component[index]
            else:
                later = index >= o.start
                y[later] += o.factor * o.component[index[later]]
        return y

    def _windows(self, ch: _Channel, plans: list[_Plan]):
        """Regions moved: synthesise the changes of their coefficient windows only.

        A region over several levels changes a window in each; for the DWT
        their changes are synthesised together (one cascade, see
        ``tf.local_synthesis_bands``).
        """
        deltas = {}
        for p in plans:
            k0, k1 = p.window
            old_vals = self._values(ch, p.key, p.old, k0, k1)
            new_vals = self._values(ch, p.key, p.new, k0, k1)
            kept = ch.values.get(p.key)
            if kept is not None:
                kept[k0:k1] = new_vals
            deltas[p.key] = (old_vals - new_vals, k0)
        if self.spec.kind not in tf.LOCAL_KINDS:
            # no local synthesis for the SWT: each band's change is a full inverse
            spans = [s for s in (self._add_local(ch, key, d, k0)
                                 for key, (d, k0) in deltas.items()) if s is not None]
            return (min(a for a, _ in spans), max(b for _, b in spans)) if spans else None
        start, seg = tf.local_synthesis_bands(deltas, ch.lengths, self.spec, self.recording.n)
        if not seg.size:
            return None
        ch.cleaned[start:start + seg.shape[0]] -= seg
        return start, start + seg.shape[0]

    def _band(self, ch: _Channel, p: _Plan):
        """Any other change of one band: the inverse of its change of ``c - e``."""
        n = self.recording.n
        c = ch.band(p.key, self.level)
        delta = np.empty_like(c)           # change of c - e = old e - new e
        lam_old, lam_new = self._lams(ch, p.key, p.old), self._lams(ch, p.key, p.new)
        for b0, b1 in _blocks(c.shape[0]):
            np.subtract(self._values(ch, p.key, p.old, b0, b1, lam_old),
                        self._values(ch, p.key, p.new, b0, b1, lam_new), out=delta[b0:b1])
        nz = delta != 0
        if not nz.any():
            return None
        k0 = int(np.argmax(nz))
        k1 = c.shape[0] - int(np.argmax(nz[::-1]))
        del nz
        if self.spec.kind in tf.LOCAL_KINDS and (k1 - k0) <= LOCAL_SHARE * c.shape[0]:
            return self._add_local(ch, p.key, delta[k0:k1], k0)
        idx = tf.band_index(p.key, self.level)
        tf.inverse_into(lambda i: delta if i == idx else None, ch.lengths, self.spec, n,
                        ch.cleaned, base=ch.cleaned)
        return 0, n

    def _add_local(self, ch: _Channel, key, delta_removed: np.ndarray, k0: int):
        """Subtract the synthesis of a coefficient window of (c - e) change from cleaned."""
        n = self.recording.n
        if delta_removed.shape[0] == 0:
            return None
        if self.spec.kind not in tf.LOCAL_KINDS:
            idx = tf.band_index(key, self.level)
            full = np.zeros(ch.lengths[idx], dtype=self.dtype)
            full[k0:k0 + delta_removed.shape[0]] = delta_removed
            tf.inverse_into(lambda i: full if i == idx else None, ch.lengths, self.spec, n,
                            ch.cleaned, base=ch.cleaned)
            return 0, n
        start, seg = tf.local_synthesis(delta_removed, k0, key, ch.lengths, self.spec, n)
        if seg.size:
            ch.cleaned[start:start + seg.shape[0]] -= seg
            return start, start + seg.shape[0]
        return None

    def settle(self) -> None:
        """Recompute what was updated by parts, from scratch (bit-identical to a fresh model)."""
        for ch in self._ch:
            if ch.incremental:
                self._recompute(ch)

    # --------------------------------------------------------------- results

    def cleaned(self, channel: int | None = None) -> np.ndarray:
        """Cleaned signal of one channel, or all as (n, channels).

        Read it, do not write into it: until the first edit it is the
        recording's own column, and an edit may replace the array.
        """
        for ch in self._ch if channel is None else [self._ch[channel]]:
            self._pay(ch)
        if channel is not None:
            return self._ch[channel].cleaned
        return np.column_stack([ch.cleaned for ch in self._ch])

    def removed(self, channel: int | None = None) -> np.ndarray:
        if channel is not None:
            ch = self._ch[channel]
            return ch.x - self.cleaned(channel)
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
        ch = self._ch[channel]
        if start is None and stop is None:
            return self._values_full(ch, key, keep=True)
        count = ch.lengths[tf.band_index(key, self.level)]
        k0, k1, _ = slice(start, stop).indices(count)
        kept = ch.values.get(key)
        if kept is not None:
            return kept[k0:max(k0, k1)]
        return self._values(ch, key, ch.chains.get(key, ()), k0, max(k0, k1))

    def band_gain(self, channel: int, key) -> float | None:
        """A band's uniform gain, or None when its edits are not a uniform gain (cheap)."""
        ch = self._ch[channel]
        shape, gain = ed.split_gain(ch.chains.get(key, ()), self._ctx(ch, key))
        return None if shape else gain

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
        ch = self._ch[channel]
        gain = self.band_gain(channel, key) if edited else 1.0
        if gain is not None:
            return self._component(ch, key) * gain
        return tf.band_component(ch.coeffs, key, self.spec, self.recording.n,
                                 values=self._values_full(ch, key))

    def band_component_span(self, channel: int, key, start: int, stop: int,
                            edited: bool = True) -> np.ndarray:
        """Samples ``start .. stop`` of a band's time-domain component.

        The same numbers as ``band_component(...)[start:stop]``; for the DWT the
        cost follows the span (local synthesis of the coefficients whose
        support reaches it), so a window can draw a zoomed view of a long
        recording without synthesising the whole band.
        """
        n = self.recording.n
        start, stop = max(0, int(start)), min(n, int(stop))
        if stop <= start:
            return np.zeros(0)
        ch = self._ch[channel]
        c = ch.band(key, self.level)
        j = self.level if key == "a" else int(key)
        step = 2 ** j
        reach = tf.filter_length(self.spec.wavelet) * step
        near_edge = start < reach or stop > n - reach
        if (self.spec.kind not in tf.LOCAL_KINDS
                or (self.spec.mode == "periodization" and near_edge)):
            # No local synthesis for the SWT; periodization wraps at the ends.
            return self.band_component(channel, key, edited)[start:stop].copy()
        # Coefficient k reaches samples within about (L - 1) * 2**j of 2**j * k.
        k0 = max(0, (start - reach) // step - 1)
        k1 = min(c.shape[0], -(-(stop + reach) // step) + 1)
        values = (self.edited_coefficients(channel, key, k0, k1) if edited
                  else ed.state_values(c[k0:k1], 1.0))
        out = np.zeros(stop - start)
        if k1 <= k0:
            return out
        s, seg = tf.local_synthesis(values, k0, key, ch.lengths, self.spec, n)
        a, b = max(s, start), min(s + seg.shape[0], stop)
        if b > a:
            out[a - start:b - start] = seg[a - s:b - s]
        return out

    def band_range_hz(self, key) -> tuple[float, float]:
        return tf.band_range_hz(key, self.level, self.recording.rate)

    def noise_sigma(self, channel: int, key=1) -> float:
        return self._sigma(self._ch[channel], key)

    def threshold_for(self, channel: int, key, edit: Edit) -> float:
        """The threshold an edit uses on a band: the one applied (for drawing it).

        For an edit in force on the band this is the lambda of its chain
        (SURE and BayesShrink look at the band as it stands when the edit
        applies); for any other edit, what it would use on the band as edited.
        """
        ch = self._ch[channel]
        chain = ch.chains.get(key, ())
        if edit.op == "threshold" and edit in chain:
            at = [e for e in chain if e.op == "threshold"].index(edit)
            return self._lams(ch, key, chain)[at]
        cur = self.edited_coefficients(channel, key)
        return ed.threshold_value(edit, cur, self._ctx(ch, key))

    def band_table(self, channel: int) -> list[dict]:
        """Per-band figures of the original recording (shared/CONTRACT.md ``bands --json``).

        Worked out by ``core.band_figures`` once per decomposition; every view
        (command line, band table export, Bands pane, API) reads this table.
        Returns copies: a caller may change its rows.
        """
        ch = self._ch[channel]
        if ch.figures is None:
            ch.figures = bf.band_table(ch.x, ch.coeffs, self.spec, self.recording.rate,
                                       self.dtype)
        return [dict(r) for r in ch.figures]

    def _signal_energy(self, ch: _Channel) -> float:
        if "x" not in ch.metric_facts:
            ch.metric_facts["x"] = bf.signal_energy(ch.x)
        return ch.metric_facts["x"]

    def metrics(self, channel: int) -> dict:
        """What the recipe did to one channel.

        Every sum runs over contiguous blocks (``core.band_figures``), so a
        channel's figures are the same bits whatever channels sit beside it.
        """
        ch = self._ch[channel]
        level = self.level
        x = ch.x
        facts = ch.metric_facts          # figures of the original, once per decomposition
        per_band = []
        changed = zeroed = total = 0
        for key in self.band_keys:
            c = ch.band(key, level)
            gain = self.band_gain(channel, key)
            if gain == 1.0:
                # c - c: nothing changed (the same figures the general path gives)
                ch_count = z_count = 0
                e_removed = 0.0
            elif gain == 0.0:
                # c - 0 is c itself: every non-zero coefficient changed and zeroed
                if key not in facts:
                    facts[key] = (int(np.count_nonzero(c)), bf.coefficient_moments(c)[0])
                ch_count = z_count = facts[key][0]
                e_removed = facts[key][1]
            else:
                e = ed.state_values(c, gain) if gain is not None else self._values_full(ch, key)
                d = c - e
                ch_count = int(np.count_nonzero(d))
                z_count = int(np.count_nonzero((e == 0) & (c != 0)))
                e_removed = bf.coefficient_moments(d)[0]
            changed += ch_count
            zeroed += z_count
            total += c.shape[0]
            per_band.append({"name": tf.band_name(key, level),
                             "energy_removed": e_removed,
                             "changed": ch_count, "zeroed": z_count, "count": int(c.shape[0])})
        e_orig = self._signal_energy(ch)
        n = x.shape[0]
        e_rem, e_clean, peak = mt.removed_figures(x, self.cleaned(channel))
        return {
            "bands": per_band,
            "changed_fraction": changed / total if total else 0.0,
            "zeroed_fraction": zeroed / total if total else 0.0,
            "energy_removed_fraction": e_rem / e_orig if e_orig > 0 else 0.0,
            "rms_original": mt.rms_of_energy(e_orig, n),
            "rms_cleaned": mt.rms_of_energy(e_clean, n),
            "rms_removed": mt.rms_of_energy(e_rem, n),
            "snr_db": mt.snr_db_of_energies(e_orig, e_rem),
            "peak_change": peak,
        }

    def events(self, levels=(1, 2), k: float = 5.0, kind: str | None = None,
               channels: Sequence[int] | None = None):
        """Transients (shared/CONTRACT.md ``events``), through core/events.py.

        ``kind`` is the transform that times them (default: the SWT, see
        core/events.py); wavelet, level and mode are the model's.  Returns
        ``(events, noise)`` as ``core.events.detect_channels`` does.  Prepared
        levels are kept, so a new ``k`` costs only the detection.
        """
        from dataclasses import replace

        from scalesieve.core import events as ev

        spec = replace(self.spec, kind=kind or ev.DEFAULT_KIND)
        try:
            lv = ev.check_levels(levels, self.level)
            ev.check_k(k)
            spec.validate()
        except ValueError as exc:
            raise ScalesieveError(str(exc), self.recording.source or None) from None
        chosen = range(self.recording.channels) if channels is None else list(channels)
        for c in chosen:
            if not 0 <= c < self.recording.channels:
                raise ScalesieveError(f"channel {c} is not in the recording (channels "
                                      f"0-{self.recording.channels - 1})")
        cache = self.__dict__.setdefault("_event_levels", {})
        prepared = {}
        for c in chosen:
            key = (c, spec, lv)
            if key not in cache:
                # The model's own coefficients serve when they are the same
                # numbers the command line gets (same transform, float64).
                reuse = spec == self.spec and self.coefficients(c, lv[0]).dtype == np.float64
                bands = ({j: self.coefficients(c, j) for j in lv} if reuse
                         else ev.detail_bands(self.original(c), spec, lv))
                while len(cache) >= 4 * max(1, self.recording.channels):
                    cache.pop(next(iter(cache)))
                cache[key] = ev.prepare(bands, spec, self.recording.n)
            prepared[c] = cache[key]
        return ev.detect_channels(prepared, self.original, self.recording.rate, k)


def _mad_sigma(d: np.ndarray) -> float:
    """``th.mad_sigma(d)``, the same number, with one band-sized temporary instead of three.

    The median of the same values is the same number however they are
    arranged, so it may partition its own copy of ``|d|`` in place.
    """
    a = np.abs(d)
    if not a.all():
        a = a[a != 0]
    if a.size == 0:
        return 0.0
    return float(np.median(a, overwrite_input=True) / th.MAD_TO_SIGMA)


def _blocks(count: int):
    """Index ranges of ``tf.BLOCK`` coefficients covering ``0 .. count``."""
    return ((b, min(b + tf.BLOCK, count)) for b in range(0, count, tf.BLOCK))


def _axpy(a: float, x: np.ndarray, y: np.ndarray, block: int = 1 << 17) -> None:
    """y += a * x in cache-sized blocks: one pass over memory, no full temporary.

    (SciPy's BLAS axpy is a little quicker on long signals, but importing it
    costs a third of a second and its libraries some 20 MB of resident memory.)
    """
    n = y.shape[0]
    tmp = np.empty(min(block, n), dtype=y.dtype)
    for i in range(0, n, block):
        j = min(i + block, n)
        t = tmp[: j - i]
        np.multiply(x[i:j], a, out=t)
        y[i:j] += t
