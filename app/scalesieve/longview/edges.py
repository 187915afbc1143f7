"""Exact coefficients of one band over a range of indices, read from the file when asked.

A wide view draws each band from the summary's per-block largest |c|.  A gain
or a threshold changes that figure exactly, and so does a region edit for a
block wholly inside or wholly outside the region; a block that straddles a
region's edge holds coefficients of both kinds, so the view works its figure
out from the block's own coefficients (``views.long_picture``): this module
runs the forward cascade over just the samples those coefficients read
(``stream.dwt.ForwardStream`` on a stretch) and hands them back, the numbers
``pywt.wavedec`` of the whole recording gives there.  The raw coefficients of
the last few blocks asked for are kept (least recently used first out), so
another edit on the same view costs only the band's chain of edits.
"""

from __future__ import annotations

from collections import OrderedDict

import numpy as np
import pywt

from scalesieve.core import transforms as tf
from scalesieve.longview.wrapped import WRAP_MODES

#: raw coefficients kept for blocks asked for again (bytes)
KEEP_BYTES = 64 << 20
#: samples fed to the cascade at a time
FEED = tf.BLOCK


def reach(n: int, spec: tf.TransformSpec, j: int, c0: int, c1: int) -> tuple[list, list]:
    """``(first, last)`` of a cascade to level ``j`` that makes coefficients ``c0 .. c1`` of it.

    Coefficient k of a level reads 2k + 2 - L .. 2k + 1 of the level above; a
    stretch that reaches a level's end reaches every finer level's end (so the
    boundary extension there is the recording's own); every level is widened
    by ``L`` coefficients on both sides, so that a window at a level's edge
    holds the samples its extension mirrors; the first index of every level
    below ``j`` is even, as the cascade's index mapping needs
    (``stream.dwt.stretch`` works the same way for outputs).
    """
    L = pywt.Wavelet(spec.wavelet).dec_len
    sizes = [n]
    for _ in range(j):
        sizes.append(pywt.dwt_coeff_len(sizes[-1], L, spec.mode))
    first, last = [0] * (j + 1), [0] * (j + 1)
    first[j], last[j] = max(0, int(c0) - L), min(sizes[j], int(c1) + L)
    for i in range(j, 0, -1):
        lo = max(0, 2 * first[i] - L + 2)
        hi = sizes[i - 1] if last[i] >= sizes[i] else min(sizes[i - 1], 2 * last[i])
        if i > 1:
            lo, hi = max(0, lo - L), min(sizes[i - 1], hi + L)
        first[i - 1], last[i - 1] = lo - lo % 2, hi
    return first, last


class BandRanges:
    """Raw coefficients of any band of any channel of a ``LongRecording`` over an index range."""

    def __init__(self, lr, keep_bytes: int = KEEP_BYTES):
        self.lr = lr
        self.keep_bytes = int(keep_bytes)
        self._kept: OrderedDict = OrderedDict()
        self._bytes = 0
        self.made = 0            # ranges worked out from the file (not from what was kept)

    def coefficients(self, k: int, key, c0: int, c1: int) -> np.ndarray:
        """Coefficients ``c0 .. c1`` of band ``key`` (``"a"`` or a level) of channel ``k``."""
        from scalesieve.stream.dwt import ForwardStream

        lr = self.lr
        count = tf.band_lengths(lr.n, lr.spec)[tf.band_index(key, lr.spec.level)]
        c0, c1 = max(0, int(c0)), min(count, int(c1))
        if c1 <= c0:
            return np.zeros(0)
        tag = (k, key, c0, c1)
        got = self._kept.get(tag)
        if got is not None:
            self._kept.move_to_end(tag)
            return got
        if lr.spec.mode in WRAP_MODES:
            from scalesieve.longview.wrapped import WrappedStretch

            ws = WrappedStretch(lambda a, b: lr.reader.read(a, b)[:, k], lr.n, lr.spec)
            details, approx = ws.forward({key: [(c0, c1)]})
            got = (approx[lr.spec.level] if key == "a" else details[key]).take(np.arange(c0, c1))
            self.made += 1
            self._keep(tag, got)
            return got
        j = lr.spec.level if key == "a" else int(key)
        first, last = reach(lr.n, lr.spec, j, c0, c1)
        out = np.empty(c1 - c0)

        def put(band, k0, values):
            if band != key:
                return
            a, b = max(c0, k0), min(c1, k0 + values.shape[0])
            if b > a:
                out[a - c0:b - c0] = values[a - k0:b - k0]
        fwd = ForwardStream(lr.n, lr.spec, put, depth=j, first=first, last=last)
        x = np.ascontiguousarray(lr.reader.read(first[0], last[0])[:, k])
        for a in range(0, x.shape[0], FEED):
            fwd.feed(x[a:a + FEED])
        self.made += 1
        self._keep(tag, out)
        return out

    def _keep(self, tag, values: np.ndarray) -> None:
        if values.nbytes > self.keep_bytes:
            return
        self._kept[tag] = values
        self._bytes += values.nbytes
        while self._bytes > self.keep_bytes:
            _, old = self._kept.popitem(last=False)
            self._bytes -= old.nbytes
