"""The apply engine: bring a channel's cleaned signal to a recipe, cheaply.

The cleaned signal is kept as ``original - inverse(c - e)`` (``c`` the
original coefficients, ``e`` the edited ones).  The inverse transform is
linear, so a changed band adds the inverse of its own change: a gain change a
multiple of a cached time component, a region edit the local synthesis of its
coefficient window, anything else one inverse transform (``recompute``).

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

from typing import Sequence

import numpy as np

from scalesieve.core import edits as ed
from scalesieve.core import thresholds as th
from scalesieve.core import transforms as tf
from scalesieve.core.blocked import axpy, blocks
from scalesieve.model import deferred, planning
from scalesieve.model.changes import Change
from scalesieve.model.channel import Channel
from scalesieve.model.planning import Plan

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


class Engine:
    """Computations on the channels of one decomposition (``spec``) of ``n`` samples."""

    def __init__(self, spec: tf.TransformSpec, n: int, rate: float, dtype):
        self.spec = spec
        self.level = int(spec.level)
        self.n = n
        self.rate = rate
        self.dtype = np.dtype(dtype)

    # ------------------------------------------------------ what edits need

    def ctx(self, ch: Channel, key) -> ed.BandContext:
        """What edits need to know about a band; made once per band and transform."""
        ctx = ch.contexts.get(key)
        if ctx is None:
            count = ch.lengths[tf.band_index(key, self.level)]
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
                key=key, n_samples=self.n, rate=self.rate,
                positions=lambda: self.positions(ch, key),
                sigma_finest=(lambda: self.sigma(ch, "finest")) if spec.kind == "packet"
                else (lambda: self.sigma(ch, 1) * th.white_noise_gain(spec.kind, key, spec.level)),
                sigma_level=lambda: self.sigma(ch, key),
                span=span)
        return ctx

    def positions(self, ch: Channel, key) -> np.ndarray:
        if key not in ch.positions:
            count = ch.lengths[tf.band_index(key, self.level)]
            ch.positions[key] = tf.coefficient_positions(key, self.spec, count)
        return ch.positions[key]

    def sigma(self, ch: Channel, key) -> float:
        # Noise comes from the original coefficients: earlier edits in the
        # recipe do not change what the recording's noise is.
        if key not in ch.sigma:
            if key == "finest":
                # packet bands: sigma of the level-1 detail, as for the DWT (node "d")
                from scalesieve.core import packets as wp

                d1 = wp.finest_detail(ch.x, self.spec.wavelet, self.spec.mode)
                ch.sigma[key] = th.mad_sigma(d1.astype(self.dtype, copy=False))
            else:
                ch.sigma[key] = th.mad_sigma(ch.band(key, self.level))
        return ch.sigma[key]

    def lams(self, ch: Channel, key, chain: tuple) -> tuple:
        cache = ch.thresholds.get(key)
        if cache is None:
            cache = ch.thresholds[key] = ed.ThresholdMemo()
        lams = ed.chain_thresholds(ch.band(key, self.level), chain, self.ctx(ch, key), cache)
        if cache.nodes > 2 * len(chain) + THRESHOLDS_KEPT:
            cache.keep_only(chain)      # memory follows the recipe's length, not its history
        return lams

    # ---------------------------------------------------------- edited values

    def values(self, ch: Channel, key, chain: tuple, k0: int = 0, k1: int | None = None,
               lams: tuple | None = None) -> np.ndarray:
        """Edited values of coefficients k0 .. k1 of a band under ``chain``."""
        c = ch.band(key, self.level)
        k1 = c.shape[0] if k1 is None else k1
        if lams is None:
            lams = self.lams(ch, key, chain)
        v = ed.chain_values(c[k0:k1], chain, self.ctx(ch, key), lams, k0)
        return v if isinstance(v, np.ndarray) else c[k0:k1] * v

    def values_full(self, ch: Channel, key, chain: tuple | None = None,
                    keep: bool = False) -> np.ndarray:
        """All edited values of a band, made block by block (no full-size temporaries)."""
        current = chain is None or chain == ch.chains.get(key, ())
        if current and key in ch.values:
            return ch.values[key]
        chain = ch.chains.get(key, ()) if chain is None else chain
        c = ch.band(key, self.level)
        out = np.empty_like(c)
        lams = self.lams(ch, key, chain)
        for b0, b1 in blocks(c.shape[0], tf.BLOCK):
            out[b0:b1] = self.values(ch, key, chain, b0, b1, lams)
        if keep and current:
            ch.values[key] = out
        return out

    def edited(self, ch: Channel, key, start: int | None, stop: int | None) -> np.ndarray:
        """Edited coefficients of a band, or of indices ``start .. stop`` of it."""
        if start is None and stop is None:
            return self.values_full(ch, key, keep=True)
        count = ch.lengths[tf.band_index(key, self.level)]
        k0, k1, _ = slice(start, stop).indices(count)
        kept = ch.values.get(key)
        if kept is not None:
            return kept[k0:max(k0, k1)]
        return self.values(ch, key, ch.chains.get(key, ()), k0, max(k0, k1))

    def band_gain(self, ch: Channel, key) -> float | None:
        """A band's uniform gain, or None when its edits are not a uniform gain."""
        shape, gain = ed.split_gain(ch.chains.get(key, ()), self.ctx(ch, key))
        return None if shape else gain

    def threshold_for(self, ch: Channel, key, edit) -> float:
        """The threshold an edit uses on a band (the applied one when in force there)."""
        chain = ch.chains.get(key, ())
        if edit.op == "threshold" and edit in chain:
            at = [e for e in chain if e.op == "threshold"].index(edit)
            return self.lams(ch, key, chain)[at]
        cur = self.edited(ch, key, None, None)
        return ed.threshold_value(edit, cur, self.ctx(ch, key))

    def removed_band(self, ch: Channel, key):
        """``c - e`` of a band under its chain, or None when the band is untouched."""
        c = ch.band(key, self.level)
        chain = ch.chains.get(key, ())
        ctx = self.ctx(ch, key)
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
        lams = self.lams(ch, key, chain)
        for b0, b1 in blocks(c.shape[0], tf.BLOCK):
            np.subtract(c[b0:b1], self.values(ch, key, chain, b0, b1, lams), out=r[b0:b1])
        return r

    # ------------------------------------------------------------ time domain

    def band_component(self, ch: Channel, key, edited: bool = True) -> np.ndarray:
        """Time-domain component of one band, as edited (or original)."""
        gain = self.band_gain(ch, key) if edited else 1.0
        if gain is not None:
            return self.component(ch, key) * gain
        return tf.band_component(ch.coeffs, key, self.spec, self.n,
                                 values=self.values_full(ch, key))

    def component_span(self, ch: Channel, key, start: int, stop: int,
                       edited: bool = True) -> np.ndarray:
        """Samples ``start .. stop`` of a band's component (local synthesis for the DWT)."""
        n = self.n
        start, stop = max(0, int(start)), min(n, int(stop))
        if stop <= start:
            return np.zeros(0)
        c = ch.band(key, self.level)
        j = self.level if key == "a" else int(key)
        step = 2 ** j
        reach = tf.filter_length(self.spec.wavelet) * step
        near_edge = start < reach or stop > n - reach
        if (self.spec.kind not in tf.LOCAL_KINDS
                or (self.spec.mode == "periodization" and near_edge)):
            # No local synthesis for the SWT; periodization wraps at the ends.
            return self.band_component(ch, key, edited)[start:stop].copy()
        # Coefficient k reaches samples within about (L - 1) * 2**j of 2**j * k.
        k0 = max(0, (start - reach) // step - 1)
        k1 = min(c.shape[0], -(-(stop + reach) // step) + 1)
        values = (self.edited(ch, key, k0, k1) if edited
                  else ed.state_values(c[k0:k1], 1.0))
        out = np.zeros(stop - start)
        if k1 <= k0:
            return out
        s, seg = tf.local_synthesis(values, k0, key, ch.lengths, self.spec, n)
        a, b = max(s, start), min(s + seg.shape[0], stop)
        if b > a:
            out[a - start:b - start] = seg[a - s:b - s]
        return out

    def cache_limit(self) -> int:
        size = self.n * self.dtype.itemsize
        return max(1, min(COMPONENT_CACHE, COMPONENT_BYTES // max(size, 1)))

    def group_component(self, ch: Channel, members: tuple) -> np.ndarray:
        """Time component of bands together, each as its ``shape`` chain makes it."""
        comp = ch.components.pop(members, None)
        if comp is None:
            spare = None
            while ch.components and len(ch.components) >= self.cache_limit():
                # make room first, and write the new component over the old one:
                # cached components never leave the model (callers get products)
                spare = ch.components.pop(next(iter(ch.components)))
                if any(o.component is spare for o in ch.owed):
                    deferred.pay(ch)     # what a deferred pass still reads is written over
            level = self.level
            parts = {tf.band_index(key, level): (key, shape) for key, shape in members}

            def band(i):
                if i not in parts:
                    return None
                key, shape = parts[i]
                return ch.band(key, level) if not shape else self.values_full(ch, key, shape)

            comp = spare if spare is not None else np.empty(self.n, dtype=self.dtype)
            del spare
            tf.inverse_into(band, ch.lengths, self.spec, self.n, comp)
        ch.components[members] = comp          # most recently used last
        return comp

    def component(self, ch: Channel, key) -> np.ndarray:
        """Unit-gain time component of a band (the original coefficients alone)."""
        return self.group_component(ch, ((key, ()),))

    # ------------------------------------------------------------- applying

    def apply(self, channels: list[Channel], edits: Sequence, full: bool = False,
              progress=None, defer: bool = False) -> Change:
        """Bring every band to ``edits``; ``full`` recomputes from scratch.

        ``defer``: record gain passes instead of making them (``deferred``).
        """
        n = self.n
        kind = self.spec.kind
        touched_bands: set = set()
        span_lo, span_hi = None, None
        changed_channels = []
        for k, ch in enumerate(channels):
            changed = [(key, chain)
                       for key, chain in planning.chains_for(edits, k, self.spec).items()
                       if full or ch.chains.get(key, ()) != chain]
            if not changed:
                continue
            changed_channels.append(k)
            touched_bands.update(key for key, _ in changed)
            plans = [] if full else planning.plans_for(
                changed, lambda key, chain, ch=ch: self.plan(ch, key, chain), kind)
            groups = planning.gain_groups(plans or [])
            if (plans is None or full
                    or planning.syntheses(plans, kind)
                    + sum(g not in ch.components for g in groups) >= 2):
                # two syntheses or more: one inverse transform is cheaper
                for key, chain in changed:
                    ch.chains[key] = chain
                    ch.values.pop(key, None)
                part = None if progress is None else (
                    lambda f, k=k: progress((k + f) / len(channels)))
                self.recompute(ch, part)
                span_lo, span_hi = 0, n
                continue
            ch.incremental = True
            self.own_cleaned(ch)
            spans = [self.gain(ch, members, factor, defer) for members, factor in groups.items()]
            windows = [p for p in plans if p.kind == "window"]
            if windows:
                spans.append(self.windows(ch, windows))
            for p in plans:
                if p.kind == "band":
                    spans.append(self.band(ch, p))
                if p.kind != "window":
                    ch.values.pop(p.key, None)
                ch.chains[p.key] = p.new
            if not any(ch.chains.values()):
                # every edit undone: the recording exactly, not it plus round-off
                self.recompute(ch)
            for span in spans:
                if span is not None:
                    span_lo = span[0] if span_lo is None else min(span_lo, span[0])
                    span_hi = span[1] if span_hi is None else max(span_hi, span[1])
        span = None if span_lo is None else (int(span_lo), int(span_hi))
        return Change("recipe", changed_channels, sorted(touched_bands, key=str), span)

    def plan(self, ch: Channel, key, chain: tuple) -> Plan:
        return planning.plan_band(key, ch.chains.get(key, ()), chain, self.ctx(ch, key),
                                  lambda c: self.lams(ch, key, c))

    def settle(self, channels: list[Channel]) -> None:
        """Recompute what was updated by parts, from scratch (bit-identical to a fresh model)."""
        for ch in channels:
            if ch.incremental:
                self.recompute(ch)

    def own_cleaned(self, ch: Channel) -> None:
        """Give the cleaned signal its own array before it is written (never the recording)."""
        if ch.cleaned is ch.x:
            ch.cleaned = np.array(ch.x, dtype=self.dtype)

    def recompute(self, ch: Channel, progress=None) -> None:
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
            ch.cleaned = np.empty(self.n, dtype=self.dtype)
        total = len(keys)

        def band(i):
            if progress:
                progress(i / total)
            return self.removed_band(ch, keys[i])

        tf.inverse_into(band, ch.lengths, self.spec, self.n, ch.cleaned, base=ch.x)
        if progress:
            progress(1.0)

    def gain(self, ch: Channel, members: tuple, factor: float, defer: bool):
        # cleaned = x - (1 - gain) * component, so it moves by (new - old) * component
        comp = self.group_component(ch, members)
        if defer:
            deferred.owe(ch, comp, factor)
        else:
            axpy(factor, comp, ch.cleaned)
        return 0, self.n

    def band(self, ch: Channel, p: Plan):
        """Any other change of one band: the inverse of its change of ``c - e``."""
        n = self.n
        c = ch.band(p.key, self.level)
        delta = np.empty_like(c)           # change of c - e = old e - new e
        lam_old, lam_new = self.lams(ch, p.key, p.old), self.lams(ch, p.key, p.new)
        for b0, b1 in blocks(c.shape[0], tf.BLOCK):
            np.subtract(self.values(ch, p.key, p.old, b0, b1, lam_old),
                        self.values(ch, p.key, p.new, b0, b1, lam_new), out=delta[b0:b1])
        nz = delta != 0
        if not nz.any():
            return None
        k0 = int(np.argmax(nz))
        k1 = c.shape[0] - int(np.argmax(nz[::-1]))
        del nz
        if self.spec.kind in tf.LOCAL_KINDS and (k1 - k0) <= LOCAL_SHARE * c.shape[0]:
            return self.add_local(ch, p.key, delta[k0:k1], k0)
        idx = tf.band_index(p.key, self.level)
        tf.inverse_into(lambda i: delta if i == idx else None, ch.lengths, self.spec, n,
                        ch.cleaned, base=ch.cleaned)
        return 0, n

    def add_local(self, ch: Channel, key, delta_removed: np.ndarray, k0: int):
        """Subtract the synthesis of a coefficient window of (c - e) change from cleaned."""
        n = self.n
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

    def windows(self, ch: Channel, plans: list[Plan]):
        """Regions moved: synthesise the changes of their coefficient windows only.

        A region over several levels changes a window in each; for the DWT
        their changes are synthesised together (one cascade, see
        ``tf.local_synthesis_bands``).
        """
        deltas = {}
        for p in plans:
            k0, k1 = p.window
            old_vals = self.values(ch, p.key, p.old, k0, k1)
            new_vals = self.values(ch, p.key, p.new, k0, k1)
            kept = ch.values.get(p.key)
            if kept is not None:
                kept[k0:k1] = new_vals
            deltas[p.key] = (old_vals - new_vals, k0)
        if self.spec.kind not in tf.LOCAL_KINDS:
            # no local synthesis for the SWT: each band's change is a full inverse
            spans = [s for s in (self.add_local(ch, key, d, k0)
                                 for key, (d, k0) in deltas.items()) if s is not None]
            return (min(a for a, _ in spans), max(b for _, b in spans)) if spans else None
        start, seg = tf.local_synthesis_bands(deltas, ch.lengths, self.spec, self.n)
        if not seg.size:
            return None
        ch.cleaned[start:start + seg.shape[0]] -= seg
        return start, start + seg.shape[0]
