"""The shared decomposition model: recording + transform + recipe -> results.

No Qt here.  The window, the command line and the Python API all hold one of
these, so the same recipe gives the same numbers everywhere.

How edits stay cheap (the inverse transform is linear):

* the cleaned signal is kept as ``original - inverse(c - e)`` where ``c``
  are the original coefficients and ``e`` the edited ones, so an empty
  recipe gives the input back exactly and untouched spans stay untouched;
* an edit changes ``e`` in some bands only; each changed band adds the
  inverse of its own change to the cleaned signal;
* a uniform gain change on a band is a multiple of that band's time-domain
  component, which is cached, so it costs one pass over the signal;
* a region edit changes a window of coefficients; its effect is confined to
  their support and computed by local synthesis, so its cost follows the
  window, not the recording;
* a change in many bands at once (a threshold over all details) is one
  inverse transform.

``settle()`` recomputes everything from scratch in one inverse transform, so
exports give bit-identical numbers to a fresh model (the command line).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable, Iterable, Sequence

import numpy as np

from scalesieve.core import edits as ed
from scalesieve.core import metrics as mt
from scalesieve.core import thresholds as th
from scalesieve.core import transforms as tf
from scalesieve.core.recording import Recording
from scalesieve.errors import ScalesieveError
from scalesieve.recipe import Edit, Recipe, check_against

#: below this share of a band's length a changed window is synthesised locally
LOCAL_SHARE = 0.125
#: band components cached per channel for fast gain changes
COMPONENT_CACHE = 2


@dataclass
class Change:
    """What a listener is told.  ``span`` is the changed sample range, None = all."""

    kind: str                        # "transform", "recipe"
    channels: list[int]
    bands: list = field(default_factory=list)
    span: tuple[int, int] | None = None


class _Channel:
    """Per-channel coefficients, edit states and the cleaned signal."""

    def __init__(self, x: np.ndarray, spec: tf.TransformSpec, rate: float):
        self.x = np.ascontiguousarray(x, dtype=np.float64)
        self.coeffs = tf.forward(self.x, spec)
        self.lengths = [c.shape[0] for c in self.coeffs]
        self.states: dict = {}           # key -> float | ndarray
        self.chains: dict = {}           # key -> tuple of edits that made the state
        self.cleaned = self.x.copy()
        self.components: dict = {}       # key -> unit-gain time component (LRU)
        self.incremental = False         # cleaned was updated by parts since the last full pass
        self._positions: dict = {}
        self._sigma: dict = {}

    def band(self, key, level):
        return self.coeffs[tf.band_index(key, level)]


class DecompositionModel:
    """Recording, transform and recipe, with cleaned / removed / bands / metrics.

    Parameters
    ----------
    recording : Recording
    transform : TransformSpec, optional
        ``level=None`` chooses a level for the data (see ``default_level``).
    edits : sequence of Edit, optional
    progress : callable(fraction: float, text: str), optional
        Told how far a (re)decomposition has got.
    """

    def __init__(self, recording: Recording, transform: tf.TransformSpec | None = None,
                 edits: Sequence[Edit] = (), progress: Callable | None = None):
        self.recording = recording
        self._listeners: list[Callable[[Change], None]] = []
        self._history: list[tuple[Edit, ...]] = [()]
        self._pos = 0
        self._progress = progress
        self._build(transform or tf.TransformSpec())
        if edits:
            edits = tuple(edits)
            self._check(edits)
            self._history[0] = edits
            self._apply(edits, full=True)

    # ------------------------------------------------------------------ setup

    def _build(self, spec: tf.TransformSpec) -> None:
        n = self.recording.n
        try:
            self.spec = spec.resolved(n)
        except ValueError as exc:
            raise ScalesieveError(str(exc), self.recording.source or None) from None
        self._ch: list[_Channel] = []
        total = self.recording.channels
        for k in range(total):
            if self._progress:
                self._progress(k / total, f"decomposing channel {k + 1} of {total}")
            self._ch.append(_Channel(self.recording.samples[:, k], self.spec,
                                     self.recording.rate))
        if self._progress:
            self._progress(1.0, "decomposed")

    def _ctx(self, ch: _Channel, key) -> ed.BandContext:
        return ed.BandContext(
            key=key, n_samples=self.recording.n, rate=self.recording.rate,
            positions=lambda: self._positions(ch, key),
            sigma_finest=lambda: self._sigma(ch, 1),
            sigma_level=lambda: self._sigma(ch, key))

    def _positions(self, ch: _Channel, key) -> np.ndarray:
        if key not in ch._positions:
            count = ch.lengths[tf.band_index(key, self.spec.level)]
            ch._positions[key] = tf.coefficient_positions(key, self.spec, count)
        return ch._positions[key]

    def _sigma(self, ch: _Channel, key) -> float:
        # Noise comes from the original coefficients: earlier edits in the
        # recipe do not change what the recording's noise is.
        if key not in ch._sigma:
            ch._sigma[key] = th.mad_sigma(ch.band(key, self.spec.level))
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
        """Bands in table order: d1 ... dJ, then aJ."""
        return list(range(1, self.level + 1)) + ["a"]

    def band_name(self, key) -> str:
        return tf.band_name(key, self.level)

    def set_transform(self, spec: tf.TransformSpec) -> None:
        """Rerun the decomposition; the recipe is kept (levels must still exist)."""
        old = self.spec
        self._build(spec)
        try:
            self._check(self.edits)
        except ScalesieveError:
            self._build(old)
            raise
        self._apply(self.edits, full=True)
        self._notify(Change("transform", list(range(self.recording.channels))))

    # ------------------------------------------------------------------ edits

    @property
    def edits(self) -> tuple[Edit, ...]:
        return self._history[self._pos]

    def recipe(self) -> Recipe:
        return Recipe(self.spec, self.edits)

    def _check(self, edits: Iterable[Edit]) -> None:
        check_against(edits, self.level, self.recording.duration_s, self.recording.channels)

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

    def _chain(self, edits, channel: int, key) -> tuple:
        return tuple(e for e in edits
                     if e.applies_to(channel) and key in e.band_keys(self.level))

    def _apply(self, edits: Sequence[Edit], full: bool = False) -> Change:
        """Bring every band to ``edits``; ``full`` recomputes from scratch."""
        level = self.level
        touched_bands: set = set()
        span_lo, span_hi = None, None
        channels = []
        for k, ch in enumerate(self._ch):
            changed = []
            for key in tf.band_keys(level):
                chain = self._chain(edits, k, key)
                if not full and ch.chains.get(key, ()) == chain:
                    continue
                changed.append((key, chain))
            if not changed:
                continue
            channels.append(k)
            if full or len(changed) > 2:
                for key, chain in changed:
                    self._set_state(ch, key, chain)
                    touched_bands.add(key)
                self._recompute(ch)
                span_lo, span_hi = 0, self.recording.n
                continue
            for key, chain in changed:
                touched_bands.add(key)
                span = self._update_band(ch, key, chain)
                if span is not None:
                    span_lo = span[0] if span_lo is None else min(span_lo, span[0])
                    span_hi = span[1] if span_hi is None else max(span_hi, span[1])
        span = None if span_lo is None else (int(span_lo), int(span_hi))
        return Change("recipe", channels, sorted(touched_bands, key=str), span)

    def _set_state(self, ch: _Channel, key, chain: tuple) -> None:
        c = ch.band(key, self.level)
        ch.states[key] = ed.apply_chain(c, chain, self._ctx(ch, key)) if chain else 1.0
        ch.chains[key] = chain

    def _recompute(self, ch: _Channel) -> None:
        """cleaned = x - inverse(c - e) in one inverse transform."""
        ch.incremental = False
        level = self.level
        diff = []
        for key in tf.band_keys(level):
            c = ch.band(key, level)
            s = ch.states.get(key, 1.0)
            if isinstance(s, np.ndarray):
                diff.append(c - s)
            else:
                diff.append(c * (1.0 - s))
        removed = tf.inverse(diff, self.spec, self.recording.n)
        np.subtract(ch.x, removed, out=ch.cleaned)

    def _component(self, ch: _Channel, key) -> np.ndarray:
        """Unit-gain time component of a band (the original coefficients alone)."""
        comp = ch.components.pop(key, None)
        if comp is None:
            comp = tf.band_component(ch.coeffs, key, self.spec, self.recording.n)
        ch.components[key] = comp          # most recently used last
        while len(ch.components) > COMPONENT_CACHE:
            ch.components.pop(next(iter(ch.components)))
        return comp

    def _update_band(self, ch: _Channel, key, chain: tuple):
        """Bring one band to ``chain``; add its change to cleaned.  Returns the span."""
        ch.incremental = True
        level = self.level
        n = self.recording.n
        c = ch.band(key, level)
        old_chain = ch.chains.get(key, ())
        old = ch.states.get(key, 1.0)
        window = self._window_change(ch, key, old_chain, chain, old)
        if window is not None:
            k0, k1 = window
            ctx = self._ctx(ch, key)
            new_vals = ed.apply_chain_window(c[k0:k1], k0, chain, ctx)
            delta_e = new_vals - old[k0:k1]
            old[k0:k1] = new_vals
            ch.chains[key] = chain
            return self._add_local(ch, key, -delta_e, k0)
        self._set_state(ch, key, chain)
        new = ch.states[key]
        if not isinstance(old, np.ndarray) and not isinstance(new, np.ndarray):
            g = new - old
            if g == 0.0:
                return None
            comp = self._component(ch, key)
            # cleaned = x - (1 - gain) * component, so it moves by (new - old) * component
            _axpy(g, comp, ch.cleaned)
            return 0, n
        delta_r = ed.state_values(c, old) - ed.state_values(c, new)   # change of (c - e)
        nz = np.flatnonzero(delta_r)
        if nz.size == 0:
            return None
        k0, k1 = int(nz[0]), int(nz[-1]) + 1
        if self.spec.kind == "dwt" and (k1 - k0) <= LOCAL_SHARE * c.shape[0]:
            return self._add_local(ch, key, delta_r[k0:k1], k0)
        comp = tf.band_component(ch.coeffs, key, self.spec, n, values=delta_r)
        np.subtract(ch.cleaned, comp, out=ch.cleaned)
        return 0, n

    def _add_local(self, ch: _Channel, key, delta_removed: np.ndarray, k0: int):
        """Subtract the synthesis of a coefficient window of (c - e) change from cleaned."""
        n = self.recording.n
        if self.spec.kind != "dwt":
            full = np.zeros(ch.lengths[tf.band_index(key, self.level)])
            full[k0:k0 + delta_removed.shape[0]] = delta_removed
            comp = tf.band_component(ch.coeffs, key, self.spec, n, values=full)
            np.subtract(ch.cleaned, comp, out=ch.cleaned)
            return 0, n
        start, seg = tf.local_synthesis(delta_removed, k0, key, ch.lengths, self.spec, n)
        if seg.size:
            ch.cleaned[start:start + seg.shape[0]] -= seg
            return start, start + seg.shape[0]
        return None

    def _window_change(self, ch: _Channel, key, old_chain: tuple, chain: tuple, old):
        """Index window when the chains differ by one region edit and are pointwise."""
        if not isinstance(old, np.ndarray):
            return None
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
        if not all(ed.is_pointwise(e) for e in chain):
            return None
        ctx = self._ctx(ch, key)
        sls = [ed.region_slice(e, ctx) for e in mid_old + mid_new]
        k0 = min(sl.start for sl in sls)
        k1 = max(sl.stop for sl in sls)
        if k1 <= k0:
            return k0, k0
        return k0, k1

    def settle(self) -> None:
        """Recompute what was updated by parts, from scratch (bit-identical to a fresh model)."""
        for ch in self._ch:
            if ch.incremental:
                self._recompute(ch)

    # --------------------------------------------------------------- results

    def cleaned(self, channel: int | None = None) -> np.ndarray:
        """Cleaned signal of one channel, or all as (n, channels)."""
        if channel is not None:
            return self._ch[channel].cleaned
        return np.column_stack([ch.cleaned for ch in self._ch])

    def removed(self, channel: int | None = None) -> np.ndarray:
        if channel is not None:
            ch = self._ch[channel]
            return ch.x - ch.cleaned
        return np.column_stack([ch.x - ch.cleaned for ch in self._ch])

    def original(self, channel: int) -> np.ndarray:
        return self._ch[channel].x

    def coefficients(self, channel: int, key) -> np.ndarray:
        """Original coefficients of a band."""
        return self._ch[channel].band(key, self.level)

    def edited_coefficients(self, channel: int, key) -> np.ndarray:
        ch = self._ch[channel]
        return ed.state_values(ch.band(key, self.level), ch.states.get(key, 1.0))

    def band_gain_state(self, channel: int, key):
        """A band's edit state: a number (uniform gain) or an array of values."""
        return self._ch[channel].states.get(key, 1.0)

    def coefficient_times(self, channel: int, key) -> np.ndarray:
        """Time in seconds of each coefficient of a band."""
        return self._positions(self._ch[channel], key) / self.recording.rate

    def band_component(self, channel: int, key, edited: bool = True) -> np.ndarray:
        """Time-domain component of one band, as edited (or original)."""
        ch = self._ch[channel]
        state = ch.states.get(key, 1.0) if edited else 1.0
        if not isinstance(state, np.ndarray):
            return self._component(ch, key) * state
        return tf.band_component(ch.coeffs, key, self.spec, self.recording.n, values=state)

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
        state = ch.states.get(key, 1.0) if edited else 1.0
        j = self.level if key == "a" else int(key)
        step = 2 ** j
        reach = tf.filter_length(self.spec.wavelet) * step
        near_edge = start < reach or stop > n - reach
        if self.spec.kind != "dwt" or (self.spec.mode == "periodization" and near_edge):
            # No local synthesis for the SWT; periodization wraps at the ends.
            return self.band_component(channel, key, edited)[start:stop].copy()
        # Coefficient k reaches samples within about (L - 1) * 2**j of 2**j * k.
        k0 = max(0, (start - reach) // step - 1)
        k1 = min(c.shape[0], -(-(stop + reach) // step) + 1)
        values = ed.state_values(c[k0:k1], state if not isinstance(state, np.ndarray)
                                 else state[k0:k1])
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
                bands = ({j: self.coefficients(c, j) for j in lv} if spec == self.spec
                         else ev.detail_bands(self.original(c), spec, lv))
                while len(cache) >= 4 * max(1, self.recording.channels):
                    cache.pop(next(iter(cache)))
                cache[key] = ev.prepare(bands, spec, self.recording.n)
            prepared[c] = cache[key]
        return ev.detect_channels(prepared, self.original, self.recording.rate, k)

    def noise_sigma(self, channel: int, key=1) -> float:
        return self._sigma(self._ch[channel], key)

    def threshold_for(self, channel: int, key, edit: Edit) -> float:
        """The threshold an edit would use on a band (for drawing it)."""
        ch = self._ch[channel]
        cur = self.edited_coefficients(channel, key)
        return ed.threshold_value(edit, cur, self._ctx(ch, key))

    def band_table(self, channel: int) -> list[dict]:
        """Per-band figures of the original recording (shared/CONTRACT.md fields)."""
        ch = self._ch[channel]
        level = self.level
        rate = self.recording.rate
        energies = {key: mt.energy(ch.band(key, level)) for key in self.band_keys}
        total = sum(energies.values())
        rows = []
        for key in self.band_keys:
            c = ch.band(key, level)
            lo, hi = tf.band_range_hz(key, level, rate)
            comp = self._component(ch, key)
            rows.append({
                "name": tf.band_name(key, level),
                "kind": "approx" if key == "a" else "detail",
                "level": level if key == "a" else int(key),
                "low_hz": lo, "high_hz": hi,
                "count": int(c.shape[0]),
                "energy": energies[key],
                "energy_fraction": energies[key] / total if total > 0 else 0.0,
                "rms": mt.rms(comp), "peak": mt.peak(comp),
                "kurtosis": mt.pearson_kurtosis(c),
            })
        return rows

    def metrics(self, channel: int) -> dict:
        """What the recipe did to one channel."""
        ch = self._ch[channel]
        level = self.level
        removed = ch.x - ch.cleaned
        per_band = []
        changed = zeroed = total = 0
        for key in self.band_keys:
            c = ch.band(key, level)
            e = ed.state_values(c, ch.states.get(key, 1.0))
            d = c - e
            ch_count = int(np.count_nonzero(d))
            z_count = int(np.count_nonzero((e == 0) & (c != 0)))
            changed += ch_count
            zeroed += z_count
            total += c.shape[0]
            per_band.append({"name": tf.band_name(key, level),
                             "energy_removed": mt.energy(d),
                             "changed": ch_count, "zeroed": z_count, "count": int(c.shape[0])})
        e_orig = mt.energy(ch.x)
        e_rem = mt.energy(removed)
        return {
            "bands": per_band,
            "changed_fraction": changed / total if total else 0.0,
            "zeroed_fraction": zeroed / total if total else 0.0,
            "energy_removed_fraction": e_rem / e_orig if e_orig > 0 else 0.0,
            "rms_original": mt.rms(ch.x), "rms_cleaned": mt.rms(ch.cleaned),
            "rms_removed": mt.rms(removed),
            "snr_db": mt.snr_db(ch.x, removed),
            "peak_change": mt.peak(removed),
        }


def _axpy(a: float, x: np.ndarray, y: np.ndarray, block: int = 1 << 16) -> None:
    """y += a * x in cache-sized blocks: one pass over memory, no full temporary."""
    n = y.shape[0]
    tmp = np.empty(min(block, n))
    for i in range(0, n, block):
        j = min(i + block, n)
        t = tmp[: j - i]
        np.multiply(x[i:j], a, out=t)
        y[i:j] += t
