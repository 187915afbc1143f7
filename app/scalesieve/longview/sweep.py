"""The cleaned and removed signals of a long recording in per-block figures, in one pass.

A wide view of a long recording is drawn from its summary, which knows the
original only.  After the edits settle, one streamed pass (forward cascade,
the edits, the inverse, as ``stream.pipeline.clean_stream`` runs them, but
writing nothing) cuts the cleaned signal and what was removed into the
summary's blocks and keeps each block's minimum, maximum and energy; the
view draws the part done so far and the rest once it is done.  A new edit
makes the pass stale: the caller stops it and starts another, unless only
region edits after every other edit changed and the stretch they reach is
short (``patched``): then that stretch alone is synthesised exactly and put
in the finished pass's blocks, at once.
"""

from __future__ import annotations

import time

import numpy as np

from scalesieve.core.cascade import _Carry
from scalesieve.longview import summary as sm


class CleanedSweep:
    """Per-block figures of the cleaned and removed signal of one channel under ``lr``'s edits.

    ``done`` samples are covered so far (all of them once ``finished``);
    ``cleaned`` and ``removed`` are ``summary.Series`` of the part done.
    """

    def __init__(self, lr, channel: int):
        self.lr, self.channel = lr, int(channel)
        self.edits, self.plan = lr.edits, lr.plan      # the plan is replaced, never changed
        self.done = 0
        self.finished = False
        self.cleaned = self.removed = None

    def run(self, cancelled=lambda: False, publish=None, every_s: float = 0.5) -> bool:
        """Make the pass; ``publish(self)`` every ``every_s`` seconds and at the end.

        Returns False when ``cancelled()`` stopped it.
        """
        from scalesieve.stream.pipeline import _Source
        from scalesieve.stream.wrap import forward_stream, inverse_stream

        lr, k = self.lr, self.channel
        n, spec = lr.n, lr.spec
        block = 1 << sm.BASE
        clean_b, gone_b = sm._Blocker(block), sm._Blocker(block)
        x_kept = _Carry(0, np.float64)
        made = [0]

        def out(s0, seg):
            x = x_kept.view(s0, s0 + seg.shape[0])
            clean_b.add(seg)
            gone_b.add(x - seg)
            made[0] = s0 + seg.shape[0]
            x_kept.drop_below(made[0])

        src = _Source(lr.path, lr.channel)
        bands = self.plan.bands[k]
        inv = inverse_stream(src, spec, out, k, bands)     # any mode, as the export runs it

        def put(key, k0, c):
            inv.put(key, k0, bands[key].edited(c, k0))
        fwd = forward_stream(src, spec, put, k)
        last = time.perf_counter()
        for b in src.blocks():
            if cancelled():
                return False
            col = np.ascontiguousarray(b[:, k])
            x_kept.append(col)
            fwd.feed(col)
            inv.pump()
            if publish is not None and time.perf_counter() - last >= every_s:
                self._keep(clean_b, gone_b, made[0])
                publish(self)
                last = time.perf_counter()
        self._keep(clean_b, gone_b, n, final=True)
        self.finished = True
        if publish is not None:
            publish(self)
        return True

    def _keep(self, clean_b, gone_b, done: int, final: bool = False) -> None:
        """Figures of the whole blocks made so far (every block at the end)."""
        if final:
            parts = [clean_b.finish(), gone_b.finish()]
        else:
            parts = [tuple(np.concatenate([p[i] for p in b.parts]) if b.parts else np.zeros(0)
                           for i in range(3)) for b in (clean_b, gone_b)]
            done = min(done, parts[0][0].shape[0] << sm.BASE)
        block = 1 << sm.BASE
        self.cleaned = sm.Series.from_blocks(block, done, 1.0, 0.0, *parts[0])
        self.removed = sm.Series.from_blocks(block, done, 1.0, 0.0, *parts[1])
        self.done = done


#: a region edit's change is patched into a finished pass when it spans at most this many
#: samples (else a new pass runs)
PATCH_MOST = 1 << 23


def _changed_regions(old: tuple, new: tuple):
    """The region edits in which ``new`` differs from ``old`` when every difference is in
    region edits after the last other edit of both (regions then commute with the rest: each
    scales what the chain before it made); None otherwise."""
    i = 0
    while i < min(len(old), len(new)) and old[i] == new[i]:
        i += 1
    tail = old[i:] + new[i:]
    if not tail or any(e.op != "region" for e in tail):
        return None
    return tail


def patched(sweep: CleanedSweep, lr, most: int = PATCH_MOST):
    """A finished pass made for other edits, brought to ``lr``'s edits by synthesising exactly
    only the stretch their changed region edits reach (the inverse is linear: outside it
    nothing changed); None when the edits differ otherwise or the stretch is longer than
    ``most``."""
    import pywt

    plan = lr.plan                       # one read: its edits are what the patch is for
    edits = plan.edits
    if sweep is None or not sweep.finished or sweep.edits == edits:
        return None
    changed = _changed_regions(tuple(sweep.edits), tuple(edits))
    if changed is None:
        return None
    L = pywt.Wavelet(lr.spec.wavelet).dec_len
    level = lr.spec.level
    lo, hi = lr.n, 0
    for e in changed:
        try:
            keys = e.band_keys(level)
        except ValueError:
            return None
        if e.channels is not None and sweep.channel not in e.channels:
            continue
        deepest = max(level if k == "a" else int(k) for k in keys)
        reach = (L + 2) * (1 << (deepest + 1))
        lo = min(lo, int(np.floor(e.start_s * lr.rate)) - reach)
        hi = max(hi, int(np.ceil(e.stop_s * lr.rate)) + reach)
    block = 1 << sm.BASE
    lo, hi = max(0, lo - lo % block), min(lr.n, -(-hi // block) * block)
    out = CleanedSweep(lr, sweep.channel)
    out.edits, out.plan = edits, plan
    out.done, out.finished = lr.n, True
    if hi <= lo:
        out.cleaned, out.removed = sweep.cleaned, sweep.removed
        return out
    if hi - lo > most:
        return None
    span = lr.synthesise(lo, hi, keep_coefficients=False, plan=plan)
    k = sweep.channel
    y, x = span.cleaned[:, k], span.original[:, k]
    a, b = lo // block, -(-(hi) // block)
    series = []
    for old, values in ((sweep.cleaned, y), (sweep.removed, x - y)):
        blocker = sm._Blocker(block)
        blocker.add(values)
        bl, bh, be = blocker.finish()
        lo0, hi0, en0 = (t.copy() for t in old.tables[0])
        lo0[a:b], hi0[a:b], en0[a:b] = bl, bh, be
        series.append(sm.Series.from_blocks(block, lr.n, 1.0, 0.0, lo0, hi0, en0))
    out.cleaned, out.removed = series
    return out
