"""The normalised SWT of a whole recording, block by block, as the model computes it.

The model (``core.transforms.forward``) pads the recording to ``N``, a
multiple of ``2**J``, with the boundary mode's extension, and runs
``pywt.swt(..., norm=True)``, which treats those ``N`` samples as one period
of a circle; the inverse is ``pywt.iswt`` cut to the recording's length.
Both are linear and commute with circular shifts, so each coefficient reads
a fixed stretch of samples around its index (``forward_reach``) and each
output sample a fixed stretch of coefficients (``inverse_reach``), both
found here from PyWavelets' own impulse responses.  A block of coefficients
is then the interior of ``pywt.swt`` of a window of samples holding every
sample it reads, and a block of output the interior of ``pywt.iswt`` of a
window of coefficients, within round-off of the whole-array transforms.

Indices run past both ends of the circle: index ``i`` is ``i mod N``.  A
clean starts a little before 0 (the first outputs read the last
coefficients, which read the recording's end) and ends a little after the
recording's end (read from its start); ``Circle`` reads such samples from
the file by seeking.
"""

from __future__ import annotations

import contextlib
import warnings
from functools import lru_cache
from typing import Callable

import numpy as np
import pywt

from scalesieve.core import transforms as tf

#: coefficients (or output samples) per block: big enough that PyWavelets' per-call
#: work at the coarse levels (a Python loop over 2**(j-1) offsets in iswt) stays small
SWT_BLOCK = 1 << 20


@contextlib.contextmanager
def _quiet():
    # norm=True on a biorthogonal wavelet still inverts exactly (see core.transforms)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        yield


def _probe_length(wavelet: str, level: int) -> int:
    span = (tf.filter_length(wavelet) - 1) * (2 ** level)
    m = 1 << max(level + 2, int(np.ceil(np.log2(8 * span + 8))))
    return m


@lru_cache(maxsize=32)
def forward_reach(wavelet: str, depth: int) -> tuple[int, int]:
    """``(first, last)``: coefficient ``i`` of every band of ``pywt.swt(level=depth)``
    reads samples ``i + first .. i + last`` (found from an impulse)."""
    m = _probe_length(wavelet, depth)
    p = m // 2
    x = np.zeros(m)
    x[p] = 1.0
    with _quiet():
        bands = pywt.swt(x, wavelet, level=depth, trim_approx=True, norm=True)
    lo, hi = 0, 0
    for c in bands:
        nz = np.flatnonzero(c)
        if nz.size:
            lo, hi = min(lo, int(p - nz.max())), max(hi, int(p - nz.min()))
    return lo, hi


@lru_cache(maxsize=64)
def synthesis_kernel(wavelet: str, level: int, index: int) -> tuple[int, np.ndarray]:
    """``(d0, h)``: output ``m`` of ``pywt.iswt`` of band ``index`` (PyWavelets order) alone
    is ``sum_t h[t] * c[m - d0 - t]`` (found from an impulse)."""
    m = _probe_length(wavelet, level)
    p = m // 2
    bands = [np.zeros(m) for _ in range(level + 1)]
    bands[index][p] = 1.0
    with _quiet():
        y = pywt.iswt(bands, wavelet, norm=True)
    nz = np.flatnonzero(y)
    d0, d1 = int(nz.min() - p), int(nz.max() - p)
    h = np.ascontiguousarray(y[p + d0:p + d1 + 1])
    h.setflags(write=False)
    return d0, h


@lru_cache(maxsize=32)
def inverse_reach(wavelet: str, level: int) -> tuple[int, int]:
    """``(d0, d1)``: output ``m`` of ``pywt.iswt`` reads coefficients ``m - d1 .. m - d0``."""
    ks = [synthesis_kernel(wavelet, level, i) for i in range(level + 1)]
    return min(d0 for d0, _ in ks), max(d0 + h.shape[0] - 1 for d0, h in ks)


def padding(head: np.ndarray, tail: np.ndarray, n: int, level: int, mode: str) -> np.ndarray:
    """The samples the model appends to a recording of ``n`` frames (``N - n`` rows).

    ``head`` and ``tail``: the recording's first and last frames (2-D); each
    must hold ``min(n, 2**level + 2)`` frames at least, or be the whole
    recording.  The extension is ``pywt.pad``'s in the model's padding mode.
    """
    total = tf.swt_padded_length(n, level)
    pad = total - n
    chans = tail.shape[1]
    if pad == 0:
        return np.zeros((0, chans))
    pmode = tf._swt_pad_mode(mode)
    whole = head.shape[0] >= n
    out = np.empty((pad, chans))
    for k in range(chans):
        if whole:
            out[:, k] = pywt.pad(head[:n, k], (0, pad), pmode)[n:]
        elif pmode == "periodic":
            out[:, k] = head[:pad, k]        # pad < 2**level <= the frames held
        else:
            piece = tail[:, k]
            out[:, k] = pywt.pad(piece, (0, pad), pmode)[piece.shape[0]:]
    return out


class Circle:
    """The model's padded recording read as a circle: ``blocks(t0, t1)`` gives samples
    ``t0 .. t1`` (any integers), sample ``t`` being padded sample ``t mod N``."""

    def __init__(self, src, level: int, mode: str):
        self.src, self.level = src, level
        n = self.n = src.frames
        self.N = tf.swt_padded_length(n, level)
        want = 2 ** level + 2
        if n <= 2 * want:
            head = tail = np.concatenate(list(src.blocks())) if n else np.zeros((0, src.channels))
        else:
            head = np.concatenate(list(src.blocks(start=0, stop=want)))
            tail = np.concatenate(list(src.blocks(start=n - want, stop=n)))
        self.pad = padding(head, tail, n, level, mode)

    def blocks(self, t0: int, t1: int, frames: int):
        t = t0
        while t < t1:
            r = t % self.N
            if r < self.n:
                stop = min(self.n, r + (t1 - t))
                for b in self.src.blocks(frames, start=r, stop=stop):
                    yield b
                t += stop - r
            else:
                stop = min(self.N, r + (t1 - t))
                yield self.pad[r - self.n:stop - self.n]
                t += stop - r


class SwtForward:
    """Coefficients ``lo .. hi`` of every band of ``pywt.swt(level=depth, norm=True)``.

    Fed the circle's samples ``lo + first .. hi + last`` in order (``forward_reach``),
    it tells ``put(index, k0, values)`` each block of band ``index`` (PyWavelets
    order: 0 the approximation at ``depth``, then levels depth .. 1), starting at
    (unwrapped) coefficient ``k0``.
    """

    def __init__(self, wavelet: str, depth: int, lo: int, hi: int, put: Callable,
                 block: int | None = None):
        self.wavelet, self.depth, self.put = wavelet, depth, put
        self.block = block or SWT_BLOCK
        self.first, self.last = forward_reach(wavelet, depth)
        self.next, self.hi = lo, hi
        self.x = tf._Carry(lo + self.first, np.float64)

    @property
    def samples(self) -> tuple[int, int]:
        """The circle's samples to feed: ``(t0, t1)``."""
        return self.x.lo, self.hi + self.last + 1

    def feed(self, samples: np.ndarray) -> None:
        self.x.append(samples)
        step = 2 ** self.depth
        while self.next < self.hi:
            p = self.next
            q = min(self.hi, p + self.block)
            ws, we = p + self.first, q + self.last + 1
            if self.x.hi < we:
                return
            win = self.x.view(ws, we)
            extra = -(we - ws) % step
            if extra:
                win = np.concatenate([win, np.zeros(extra)])
            with _quiet():
                c = pywt.swt(win, self.wavelet, level=self.depth, trim_approx=True, norm=True)
            for i, band in enumerate(c):
                self.put(i, p, band[p - ws:q - ws])
            self.next = q
            self.x.drop_below(q + self.first)


def _append(c, index: int, k0: int, values: np.ndarray) -> None:
    # a stream that starts further back hands in coefficients this reader never reads
    if k0 < c.hi:
        values, k0 = values[c.hi - k0:], max(k0, c.hi)
    if k0 != c.hi:
        raise ValueError(f"band {index}: block at {k0}, expected {c.hi}")
    if values.shape[0]:
        c.append(values)


class _Bands:
    """Sliding stretches of coefficients of the bands in ``used``, by unwrapped index."""

    def __init__(self, count: int, used, lo: int):
        self.used = list(used)
        self.carry = {i: tf._Carry(lo, np.float64) for i in self.used}

    def put(self, index: int, k0: int, values: np.ndarray) -> None:
        c = self.carry.get(index)
        if c is None:
            return
        _append(c, index, k0, values)

    def have(self) -> int:
        return min(c.hi for c in self.carry.values())


class SwtInverse:
    """Output samples ``start .. stop`` of ``pywt.iswt`` of bands handed in block by block.

    ``put(index, k0, values)`` takes blocks of (edited) coefficients from
    unwrapped index ``start - d1`` on (``inverse_reach``); ``out(s0, samples)``
    is told each block of output, in order.
    """

    def __init__(self, wavelet: str, level: int, out: Callable, start: int, stop: int,
                 block: int | None = None):
        self.wavelet, self.level, self.out = wavelet, level, out
        self.block = block or SWT_BLOCK
        self.d0, self.d1 = inverse_reach(wavelet, level)
        self.made, self.stop = start, stop
        self.bands = _Bands(level + 1, range(level + 1), start - self.d1)

    @property
    def coefficients(self) -> tuple[int, int]:
        """The (unwrapped) coefficients it reads: ``(k0, k1)``."""
        return self.made - self.d1, self.stop - self.d0

    def put(self, index: int, k0: int, values: np.ndarray) -> None:
        self.bands.put(index, k0, values)

    def pump(self) -> None:
        step = 2 ** self.level
        while self.made < self.stop:
            s0, s1 = self.made, min(self.stop, self.made + self.block)
            w0, w1 = s0 - self.d1, s1 - self.d0
            if self.bands.have() < w1:
                return
            extra = -(w1 - w0) % step
            win = [self.bands.carry[i].view(w0, w1) for i in range(self.level + 1)]
            if extra:
                win = [np.concatenate([w, np.zeros(extra)]) for w in win]
            with _quiet():
                y = pywt.iswt(win, self.wavelet, norm=True)
            self.out(s0, y[self.d1:self.d1 + (s1 - s0)])
            self.made = s1
            for c in self.bands.carry.values():
                c.drop_below(s1 - self.d1)


class SwtComponent:
    """Output samples ``start .. stop`` of one band alone through ``pywt.iswt``.

    An FFT filtering with the band's synthesis kernel (overlap-save), which
    is the same linear map as ``pywt.iswt`` with the other bands zero, within
    round-off, at the cost of two FFTs per block.
    """

    def __init__(self, wavelet: str, level: int, index: int, out: Callable, start: int,
                 stop: int, block: int | None = None):
        self.index, self.out = index, out
        self.d0, h = synthesis_kernel(wavelet, level, index)
        self.K = h.shape[0]
        self.F = 1 << max(int(np.ceil(np.log2(4 * self.K))), int(np.log2(block or SWT_BLOCK)))
        self.step = self.F - self.K + 1
        self.H = np.fft.rfft(h, self.F)
        self.made, self.stop = start, stop
        self.d1 = self.d0 + self.K - 1
        self.c = tf._Carry(start - self.d1, np.float64)

    def put(self, index: int, k0: int, values: np.ndarray) -> None:
        if index != self.index:
            return
        _append(self.c, index, k0, values)

    def pump(self) -> None:
        while self.made < self.stop:
            s0, s1 = self.made, min(self.stop, self.made + self.step)
            w0, w1 = s0 - self.d1, s1 - self.d0
            if self.c.hi < w1:
                return
            z = np.fft.irfft(np.fft.rfft(self.c.view(w0, w1), self.F) * self.H, self.F)
            self.out(s0, z[self.K - 1:self.K - 1 + (s1 - s0)])
            self.made = s1
            self.c.drop_below(s1 - self.d1)


def band_key(index: int, level: int):
    """The band key of PyWavelets index ``index`` at ``level`` ("a" first)."""
    return "a" if index == 0 else level - index + 1
