"""The forward DWT as a cascade over blocks: ``pywt.wavedec`` bit for bit, no level made whole.

Blocks of samples are pushed through every level at once; each level keeps
only the stretch of its approximation the next filter still needs
(:class:`_Carry`).  From ``transforms.THREADS_FROM`` samples on two cascades
share the work (PyWavelets' C code runs without the GIL).  The settings
(``BLOCK``, ``THREADS_FROM``, ``TRANSFORM_THREADS``) are read from
``scalesieve.core.transforms`` at each call, where they are documented.
"""

from __future__ import annotations

import numpy as np
import pywt

from scalesieve.core import transforms as tf
from scalesieve.core.transforms import TransformSpec  # noqa: F401  (annotations)


def _wavedec_blocked(x: np.ndarray, spec: TransformSpec, progress=None) -> list[np.ndarray]:
    """``pywt.wavedec``, bit for bit, with every level made in one streaming pass.

    Coefficient k of a level reads inputs 2k+2-L .. 2k+1 of the level above
    (filter length L), so a block of coefficients is the interior of
    ``pywt.dwt`` on a window of its input; the C code sums the same taps in
    the same order, so the numbers are identical.  Each block of samples is
    pushed through all the levels at once (a cascade): an approximation
    lives only as long as the next level needs it, so the transform touches
    no more memory than its output, and progress can be reported as it goes.

    Long recordings are split in two at the coarsest level's middle and the
    halves run in two threads (each half recomputes the few approximation
    values the other's first coefficients need), which halves the time on a
    two-core machine.
    """
    w = pywt.Wavelet(spec.wavelet)
    mode, level, n = spec.mode, spec.level, x.shape[0]
    L = w.dec_len
    sizes = [n]
    for _ in range(level):
        sizes.append(pywt.dwt_coeff_len(sizes[-1], L, mode))
    if mode not in tf._LOCAL_MODES:
        return _wavedec_by_level(x, w, mode, level, progress)
    details = [np.empty(sizes[j], dtype=x.dtype) for j in range(level + 1)]   # [0] unused
    approx = np.empty(sizes[level], dtype=x.dtype)
    if tf.TRANSFORM_THREADS < 2 or n < tf.THREADS_FROM or sizes[level] < 4 * L:
        streams = [tf._Cascade(x, w, mode, sizes, details, approx, [0] * (level + 1),
                            list(sizes))]
    else:
        # level j is cut at m_j = 2^(J-j) m_J: each half's coefficients then
        # read only its own half of the level above
        m = [0] * (level + 1)
        m[level] = sizes[level] // 2
        for j in range(level - 1, -1, -1):
            m[j] = 2 * m[j + 1]
        # the second half starts early enough to compute its first coefficients
        first = [0] * (level + 1)
        first[level] = m[level]
        for j in range(level - 1, -1, -1):
            first[j] = max(0, 2 * first[j + 1] - L + 2)
        streams = [tf._Cascade(x, w, mode, sizes, details, approx, [0] * (level + 1), m),
                   tf._Cascade(x, w, mode, sizes, details, approx, first, list(sizes),
                            write_from=m)]
    total = sum(s.inputs for s in streams)

    def report():
        if progress:
            progress(min(1.0, sum(s.done for s in streams) / total))

    if len(streams) == 1:
        streams[0].run(report)
    else:
        from concurrent.futures import ThreadPoolExecutor, wait

        with ThreadPoolExecutor(max_workers=1, thread_name_prefix="scalesieve-dwt") as pool:
            other = pool.submit(streams[1].run, None)
            try:
                streams[0].run(report)
                while not other.done():
                    wait([other], timeout=0.05)
                    report()
                other.result()              # the other half's failure, if any
            except BaseException:
                streams[1].stop = True      # a cancelled load stops both halves
                raise
    if progress:
        progress(1.0)
    return [approx] + details[:0:-1]


def _wavedec_by_level(x, w, mode, level, progress) -> list[np.ndarray]:
    """Whole levels, one ``pywt.dwt`` call each (periodic extensions read the far end)."""
    a, out = x, []
    for j in range(level):
        a, d = pywt.dwt(a, w, mode)
        out.append(d)
        if progress:
            progress((j + 1) / level)
    return [a] + out[::-1]


class _Cascade:
    """Levels 1..J of one stretch of the DWT, pushed through block by block.

    ``first[j]`` is the first coefficient of level j this stream works out
    (level 0: the first input sample), ``last[j]`` one past its last;
    coefficients from ``write_from[j]`` on are written to the outputs.  An
    approximation of level j is kept in ``carry[j]`` from the first value
    the next level can still read.
    """

    def __init__(self, x, w, mode, sizes, details, approx, first, last, write_from=None):
        self.x, self.w, self.mode = x, w, mode
        self.L = w.dec_len
        self.details, self.approx = details, approx
        self.level = len(sizes) - 1
        self.first, self.last = first, last
        self.write_from = write_from or first
        self.next = list(first)              # next coefficient to work out, per level
        self.carry = [None] + [_Carry(first[j], x.dtype) for j in range(1, self.level)]
        self.inputs = last[0] - first[0]
        self.done = 0
        self.stop = False
        # a level waits for this many new coefficients (or the end) before a call
        self.min_step = max(2 * self.L, tf.BLOCK // 64)

    def _input(self, j: int, a: int, b: int) -> np.ndarray:
        return self.x[a:b] if j == 0 else self.carry[j].view(a, b)

    def _have(self, j: int) -> tuple[int, int]:
        if j == 0:
            return self.first[0], self.first[0] + self.done
        c = self.carry[j]
        return c.lo, c.hi

    def run(self, report=None) -> None:
        while self.done < self.inputs:
            if self.stop:
                return
            self.done = min(self.inputs, self.done + tf.BLOCK)
            self._push(1)
            if report:
                report()
        self._push(1)

    def _push(self, j: int) -> None:
        """Work out what level j can now, and pass its approximation down."""
        lo, hi = self._have(j - 1)
        done_above = hi == self.last[j - 1]
        k = self.next[j]
        k_end = self.last[j] if done_above else min(self.last[j], hi // 2)
        if k_end <= k or (not done_above and k_end - k < self.min_step):
            return
        L = self.L
        s1 = hi if done_above else 2 * k_end
        s0 = max(lo, 2 * k - L + 2)
        if done_above and s1 - s0 < 2 * L:
            # a short last window: start it earlier (its first outputs are dropped)
            s0 = max(lo, s1 - 2 * L)
        s0 -= s0 % 2                      # even, as the index mapping needs (so is lo)
        ca, cd = pywt.dwt(self._input(j - 1, s0, s1), self.w, self.mode)
        off = k - s0 // 2
        w0 = max(k, self.write_from[j])
        if w0 < k_end:
            self.details[j][w0:k_end] = cd[off + w0 - k:off + k_end - k]
            if j == self.level:
                self.approx[w0:k_end] = ca[off + w0 - k:off + k_end - k]
        self.next[j] = k_end
        if j > 1:
            # the next call reads from 2 k_end + 2 - L on, or 2 L before its end
            keep = max(lo, min(2 * k_end - L + 2, s1 - 2 * L))
            self.carry[j - 1].drop_below(keep - keep % 2)
        if j < self.level:
            self.carry[j].append(ca[off:off + k_end - k])
            self._push(j + 1)


class _Carry:
    """A sliding stretch of one level's approximation: indices lo .. hi."""

    def __init__(self, lo: int, dtype):
        self.buf = np.empty(0, dtype=dtype)
        self.lo = self.hi = lo

    def view(self, a: int, b: int) -> np.ndarray:
        return self.buf[a - self.lo:b - self.lo]

    def append(self, values: np.ndarray) -> None:
        size = self.hi - self.lo
        need = size + values.shape[0]
        if need > self.buf.shape[0]:
            grown = np.empty(max(need, 2 * self.buf.shape[0]), dtype=self.buf.dtype)
            grown[:size] = self.buf[:size]
            self.buf = grown
        self.buf[size:need] = values
        self.hi += values.shape[0]

    def drop_below(self, index: int) -> None:
        cut = index - self.lo
        if cut <= 0:
            return
        rest = self.hi - index
        self.buf[:rest] = self.buf[cut:cut + rest]     # numpy copies overlaps safely
        self.lo = index
