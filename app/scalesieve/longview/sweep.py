"""The cleaned and removed signals of a long recording in per-block figures, in one pass.

A wide view of a long recording is drawn from its summary, which knows the
original only.  After the edits settle, one streamed pass (forward cascade,
the edits, the inverse, as ``stream.pipeline.clean_stream`` runs them, but
writing nothing) cuts the cleaned signal and what was removed into the
summary's blocks and keeps each block's minimum, maximum and energy; the
view draws the part done so far and the rest once it is done.  A new edit
makes the pass stale: the caller stops it and starts another.
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
