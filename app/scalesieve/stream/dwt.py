"""The DWT of a recording handed in block by block, and its inverse handed out likewise.

Both reuse the machinery of ``core.transforms``: the forward cascade
(``_Cascade``) reads its input from a sliding stretch of samples instead of
a whole array and hands each block of coefficients on instead of storing
it; the inverse synthesises each block of output with ``_synthesise`` from
windows of coefficients kept only until no later block reads them.  Only
the boundary modes that extend the signal from samples near its edge run
here (``periodic`` and ``periodization`` read the far end: ``stream.wrap``
feeds each level its wrap in front of this cascade's steps).

The coefficients are those of ``pywt.wavedec`` of the whole recording, bit
for bit; the output is ``pywt.waverec`` of them.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
import pywt

from scalesieve.core import transforms as tf

#: boundary modes whose transform can run block by block
STREAM_MODES = tf._LOCAL_MODES

#: a level of the cascade works once this many of its coefficients are ready (or at
#: the end): small, so coarse levels lag the input little and the windows kept stay short
MIN_STEP = 512


def can_stream(spec: tf.TransformSpec) -> bool:
    return spec.kind == "dwt" and spec.mode in STREAM_MODES


class _Samples:
    """Stands in for the cascade's whole input: the samples not yet consumed."""

    def __init__(self, dtype, start: int = 0):
        self.dtype = np.dtype(dtype)
        self.carry = tf._Carry(start, self.dtype)

    def __getitem__(self, sl: slice) -> np.ndarray:
        return self.carry.view(sl.start, sl.stop)


class _Sink:
    """Stands in for one output band of the cascade: hands each block on."""

    def __init__(self, put: Callable, key):
        self.put, self.key = put, key

    def __setitem__(self, sl: slice, values: np.ndarray) -> None:
        self.put(self.key, sl.start, values)


class ForwardStream:
    """``pywt.wavedec`` of ``n`` samples given in blocks, handed out per band as made.

    Parameters
    ----------
    n : int
        Samples the recording holds (all of them must be fed).
    spec : TransformSpec
        Resolved; ``can_stream(spec)`` must hold.
    put : callable(key, k0, values)
        Told each block of coefficients of band ``key`` (``"a"`` or a level),
        starting at index ``k0``; blocks of one band come in order.  ``values``
        may be a view the cascade reuses: copy what must outlive the call.
    depth : int, optional
        Run only levels 1 .. depth (a first pass that needs fine levels only);
        then no approximation is handed out.
    first, last : list of int, optional
        Only a stretch: coefficients ``first[j] .. last[j]`` of each level j
        (level 0: the samples fed), as ``stretch`` works them out.
    """

    def __init__(self, n: int, spec: tf.TransformSpec, put: Callable,
                 depth: int | None = None, dtype=np.float64, first=None, last=None):
        if not can_stream(spec):
            raise ValueError(f"the {spec.kind} in mode {spec.mode} cannot run block by block")
        w = pywt.Wavelet(spec.wavelet)
        depth = spec.level if depth is None else depth
        sizes = [n]
        for _ in range(depth):
            sizes.append(pywt.dwt_coeff_len(sizes[-1], w.dec_len, spec.mode))
        self.n, self.L = n, w.dec_len
        first = [0] * (depth + 1) if first is None else list(first)
        last = list(sizes) if last is None else list(last)
        self.first0, self.last0 = first[0], last[0]
        self.x = _Samples(dtype, first[0])
        approx = _Sink(put, "a") if depth == spec.level else _Sink(lambda *a: None, "a")
        details = [None] + [_Sink(put, j) for j in range(1, depth + 1)]
        self.cascade = tf._Cascade(self.x, w, spec.mode, sizes, details, approx, first, last)
        self.cascade.min_step = max(2 * self.L, MIN_STEP)

    @property
    def fed(self) -> int:
        return self.cascade.done

    def feed(self, block: np.ndarray) -> None:
        """Push the next samples; the last block completes every level."""
        c = self.cascade
        if c.done + block.shape[0] > c.inputs:
            raise ValueError(f"fed more than the {c.inputs} samples announced")
        self.x.carry.append(block)
        c.done += block.shape[0]
        c._push(1)
        # what level 1 reads next (as _Cascade._push works it out): nothing before
        keep = min(2 * c.next[1] - self.L + 2, self.last0 - 2 * self.L)
        self.x.carry.drop_below(max(self.first0, keep - keep % 2))


class _Window:
    """Absolute indexing into a sliding stretch of one band (what ``_synthesise`` reads)."""

    def __init__(self, dtype, start: int = 0):
        self.carry = tf._Carry(start, dtype)

    def __getitem__(self, sl: slice) -> np.ndarray:
        return self.carry.view(sl.start, sl.stop)


class InverseStream:
    """``pywt.waverec`` of coefficients handed in per band, handed out in blocks of samples.

    Parameters
    ----------
    n : int
        Samples to make.
    spec : TransformSpec
        Resolved, streamable.
    out : callable(start, samples)
        Told each block of output, in order.
    only : band key, optional
        Synthesise this band alone (its time-domain component); the others
        are zeros and need not be handed in.
    """

    def __init__(self, n: int, spec: tf.TransformSpec, out: Callable, dtype=np.float64,
                 block: int = tf.BLOCK, only=None, start: int = 0, stop: int | None = None,
                 band_starts=None):
        self.n, self.spec, self.out, self.block = n, spec, out, block
        self.level = spec.level
        self.lengths = tf.band_lengths(n, spec)
        self.w = pywt.Wavelet(spec.wavelet)
        self.L = self.w.rec_len
        starts = band_starts or [0] * (self.level + 1)
        self.bands = [_Window(dtype, starts[i]) for i in range(self.level + 1)]
        self.stop = n if stop is None else stop
        self.used = list(range(self.level + 1)) if only is None else \
            [tf.band_index(only, self.level)]
        self.windows = [b if i in self.used else None for i, b in enumerate(self.bands)]
        self.made = start

    def put(self, key, k0: int, values: np.ndarray) -> None:
        i = tf.band_index(key, self.level)
        if i not in self.used:
            return
        b = self.bands[i].carry
        if k0 != b.hi:
            raise ValueError(f"band {key}: block at {k0}, expected {b.hi}")
        b.append(values)

    def _needs(self, s0: int, s1: int) -> list[tuple[int, int]]:
        """Coefficients (k0, k1) of each band (PyWavelets order) outputs s0 .. s1 read."""
        L, lengths = self.L, self.lengths
        need = [(0, 0)] * (self.level + 1)
        lo, hi = s0, s1
        for i in range(self.level, 0, -1):
            k0, k1 = lo // 2, min(lengths[i], -(-(hi + L - 2) // 2))
            need[i] = (k0, k1)
            lo, hi = k0, k1
        need[0] = need[1]
        return need

    def pump(self) -> None:
        """Make every block of output the coefficients handed in so far allow."""
        while self.made < self.stop:
            s0, s1 = self.made, min(self.made + self.block, self.stop)
            need = self._needs(s0, s1)
            if any(self.bands[i].carry.hi < need[i][1] for i in self.used):
                return
            seg = tf._synthesise(self.windows[0], dict(enumerate(self.windows)), 1, self.level,
                                 self.lengths, s0, s1, self.w, self.spec.mode)
            self.out(s0, np.zeros(s1 - s0) if seg is None else seg)
            self.made = s1
            if s1 < self.stop:
                nxt = self._needs(s1, s1 + 1)
                for i in self.used:
                    self.bands[i].carry.drop_below(nxt[i][0])


def stretch(n: int, spec: tf.TransformSpec, o0: int, o1: int) -> tuple[list, list]:
    """``(first, last)`` of the cascade that makes what output samples o0 .. o1 read.

    Level j must hold the coefficients the inverse reads for those outputs,
    and what level j + 1 reads of it (coefficient k reads 2k + 2 - L .. 2k + 1
    of the level above); a stretch that reaches a level's end reaches every
    finer level's end, so the boundary extension there is the recording's own.
    ``first[j]`` is even, as the cascade's index mapping needs.
    """
    w = pywt.Wavelet(spec.wavelet)
    L, level = w.dec_len, spec.level
    sizes = [n]
    for _ in range(level):
        sizes.append(pywt.dwt_coeff_len(sizes[-1], L, spec.mode))
    need = InverseStream(n, spec, None)._needs(o0, o1)
    first, last = [0] * (level + 1), [0] * (level + 1)
    first[level], last[level] = need[0][0], need[0][1]
    for j in range(level, 0, -1):
        k0, k1 = need[tf.band_index(j, level)]
        first[j], last[j] = min(first[j], k0), max(last[j], k1)
        if j == level:
            first[j], last[j] = min(k0, need[0][0]), max(k1, need[0][1])
        lo = max(0, 2 * first[j] - L + 2)
        hi = sizes[j - 1] if last[j] >= sizes[j] else min(sizes[j - 1], 2 * last[j])
        if j > 1:
            k0, k1 = need[tf.band_index(j - 1, level)]
            lo, hi = min(lo, k0), max(hi, k1)
        first[j - 1], last[j - 1] = lo - lo % 2, hi
    first[0] = max(0, first[0] - first[0] % 2)
    return first, last
