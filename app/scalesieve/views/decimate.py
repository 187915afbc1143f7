"""Reduce long arrays to what a screen can show without losing a peak.

Traces are drawn as the minimum and maximum of each pixel column, so a
single-sample spike in ten million samples still reaches the screen; the
Scale map takes the largest magnitude of the coefficients in each column.
Long signals keep a block envelope (minimum and maximum per fixed block of
samples) so that a zoomed-out view combines blocks instead of re-reading
every sample.  Pure numpy: no Qt, no transform.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

#: a column must hold at least this many samples before it is drawn as min/max
MINMAX_FROM = 2


def column_edges(count: int, columns: int) -> np.ndarray:
    """Start index of each of ``columns`` bins over ``count`` samples, plus ``count``.

    Every bin holds ``floor`` or ``ceil`` of ``count / columns`` samples, so
    none is empty when ``count >= columns``.
    """
    columns = max(1, int(columns))
    return (np.arange(columns + 1, dtype=np.int64) * int(count)) // columns


def minmax_columns(y: np.ndarray, columns: int) -> tuple[np.ndarray, np.ndarray]:
    """Exact minimum and maximum of ``y`` in each of ``columns`` bins.

    ``len(y)`` must be at least ``columns`` (no bin is empty).
    """
    n = y.shape[0]
    if n < columns:
        raise ValueError(f"{n} samples cannot fill {columns} columns")
    starts = column_edges(n, columns)[:-1]
    return np.minimum.reduceat(y, starts), np.maximum.reduceat(y, starts)


def block_minmax(y: np.ndarray, block: int, lo: np.ndarray | None = None,
                 hi: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Minimum and maximum of ``y`` over consecutive blocks of ``block`` samples.

    ``lo`` and ``hi``, when given, receive the results (one per block, the
    last block may be short).
    """
    n = y.shape[0]
    nb = -(-n // block)
    if lo is None:
        lo, hi = np.empty(nb), np.empty(nb)
    if n == 0:
        return lo, hi
    # (reduceat measured quicker here than reductions along rows of a reshape)
    starts = np.arange(0, n, block, dtype=np.int64)
    np.minimum.reduceat(y, starts, out=lo[:nb])
    np.maximum.reduceat(y, starts, out=hi[:nb])
    return lo, hi


#: samples per step of a paired pass (small enough to stay in cache between its reads)
PAIR_CHUNK = 1 << 17


def refresh_pair(cleaned: "BlockEnvelope", removed: "BlockEnvelope", x: np.ndarray,
                 y: np.ndarray, start: int = 0, stop: int | None = None) -> None:
    """Refresh the envelopes of ``y`` and of ``x - y`` in one pass over both.

    Each step reads a cache-sized piece of ``x`` and ``y`` once and works out
    both envelopes from it, with no full-size temporary: after an edit that
    changes the whole signal this is one read of the two signals.
    """
    b = cleaned.block
    n = cleaned.n
    stop = n if stop is None else stop
    a0 = max(0, int(start)) // b * b
    a1 = min(n, -(-int(stop) // b) * b)
    step = max(b, PAIR_CHUNK // b * b)
    tmp = np.empty(min(step, max(a1 - a0, 0)), dtype=np.result_type(x.dtype, y.dtype))
    for s in range(a0, a1, step):
        e = min(a1, s + step)
        k0, k1 = s // b, -(-e // b)
        ys = y[s:e]
        block_minmax(ys, b, cleaned.lo[k0:k1], cleaned.hi[k0:k1])
        r = np.subtract(x[s:e], ys, out=tmp[:e - s])
        block_minmax(r, b, removed.lo[k0:k1], removed.hi[k0:k1])


#: samples read for a whole preview (``preview_pair``), however long the span
PREVIEW_SAMPLES = 1 << 18
#: neighbouring samples read together in a preview (64 bytes of float64)
PREVIEW_RUN = 8


def preview_pair(cleaned: "BlockEnvelope", removed: "BlockEnvelope", x: np.ndarray,
                 cleaned_at: Callable[[np.ndarray], np.ndarray], start: int = 0,
                 stop: int | None = None, budget: int | None = None) -> None:
    """Envelopes of ``y`` and ``x - y`` from a fixed number of samples per block.

    For a change that reaches the whole of a long recording, drawn before
    the exact envelopes are ready (``refresh_pair`` then replaces it): each
    block's minimum and maximum over runs of neighbouring samples spread
    evenly over it, read with ``cleaned_at(positions)``.  Its cost follows
    ``budget`` (default ``PREVIEW_SAMPLES``), not the span; it may understate
    a block's peaks, never overstate them.
    """
    b = cleaned.block
    n = cleaned.n
    stop = n if stop is None else stop
    budget = PREVIEW_SAMPLES if budget is None else budget
    k0, k1 = max(0, int(start)) // b, min(-(-n // b), -(-int(stop) // b))
    if k1 <= k0:
        return
    per = max(1, min(b, int(budget) // (k1 - k0)))
    # runs of a cache line's worth of neighbours, spread over the block: one
    # memory fetch brings a run (single samples spread wide cost one fetch each)
    run = min(PREVIEW_RUN, per)
    runs = per // run
    starts = np.arange(runs, dtype=np.int64) * b // runs // run * run
    offsets = (starts[:, None] + np.arange(run, dtype=np.int64)[None, :]).ravel()
    idx = np.arange(k0, k1, dtype=np.int64)[:, None] * b + offsets[None, :]
    np.minimum(idx, n - 1, out=idx)          # the last block may be short
    y = np.asarray(cleaned_at(idx.ravel())).reshape(idx.shape)
    y.min(axis=1, out=cleaned.lo[k0:k1])
    y.max(axis=1, out=cleaned.hi[k0:k1])
    r = x[idx.ravel()].reshape(idx.shape) - y
    r.min(axis=1, out=removed.lo[k0:k1])
    r.max(axis=1, out=removed.hi[k0:k1])


class BlockEnvelope:
    """Minimum and maximum of a signal per block of ``block`` samples.

    ``refresh`` recomputes only the blocks a change touched, so an edit
    confined to a short span costs that span.
    """

    def __init__(self, lo: np.ndarray, hi: np.ndarray, block: int, n: int):
        self.lo = lo
        self.hi = hi
        self.block = int(block)
        self.n = int(n)

    @classmethod
    def of(cls, y: np.ndarray, block: int, chunk: int = 1 << 20) -> "BlockEnvelope":
        """Envelope of a whole signal (read in chunks of whole blocks)."""
        n = y.shape[0]
        nb = -(-n // block)
        env = cls(np.empty(nb), np.empty(nb), block, n)
        env.refresh(0, n, lambda a, b: y[a:b], chunk)
        return env

    @classmethod
    def of_source(cls, fetch: Callable[[int, int], np.ndarray], n: int, block: int,
                  chunk: int = 1 << 20) -> "BlockEnvelope":
        nb = -(-n // block)
        env = cls(np.empty(nb), np.empty(nb), block, n)
        env.refresh(0, n, fetch, chunk)
        return env

    def copy(self) -> "BlockEnvelope":
        return BlockEnvelope(self.lo.copy(), self.hi.copy(), self.block, self.n)

    def scaled(self, gain: float) -> "BlockEnvelope":
        """The envelope of ``gain * signal`` (exact: scaling is monotonic)."""
        g = float(gain)
        if g >= 0:
            return BlockEnvelope(self.lo * g, self.hi * g, self.block, self.n)
        return BlockEnvelope(self.hi * g, self.lo * g, self.block, self.n)

    def refresh(self, start: int, stop: int, fetch: Callable[[int, int], np.ndarray],
                chunk: int = 1 << 20) -> None:
        """Recompute the blocks that samples ``start .. stop`` fall in.

        ``fetch(a, b)`` returns samples ``a .. b`` of the signal; it is asked
        for whole blocks, at most ``chunk`` samples at a time.
        """
        b = self.block
        a0 = max(0, int(start)) // b * b
        a1 = min(self.n, -(-int(stop) // b) * b)
        step = max(b, chunk // b * b)
        for s in range(a0, a1, step):
            e = min(a1, s + step)
            k0, k1 = s // b, -(-e // b)
            block_minmax(np.asarray(fetch(s, e)), b, self.lo[k0:k1], self.hi[k0:k1])

    def columns(self, start: int, stop: int, columns: int) -> tuple[np.ndarray, np.ndarray]:
        """Min and max per column of samples ``start .. stop``, at block resolution.

        Every peak is kept; a column edge may move by less than one block.
        """
        b = self.block
        edges = start + column_edges(stop - start, columns)
        bi = edges[:-1] // b
        b0 = int(bi[0])
        b1 = min(self.lo.shape[0], (int(stop) - 1) // b + 1)
        # A column narrower than a block repeats the block it lies in.
        starts = bi - b0
        lo = np.minimum.reduceat(self.lo[b0:b1], starts)
        hi = np.maximum.reduceat(self.hi[b0:b1], starts)
        return lo, hi


def trace_points(first_time: float, step: float, count: int, t0: float, t1: float,
                 columns: int, fetch: Callable[[int, int], np.ndarray] | None,
                 envelope: BlockEnvelope | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Points to draw a uniformly sampled sequence between times ``t0`` and ``t1``.

    Sample ``i`` sits at ``first_time + i * step``.  With more than
    ``MINMAX_FROM`` samples per column the result alternates each column's
    minimum and maximum (peak preserving); otherwise it is the samples
    themselves.  ``envelope`` (block min/max of the same sequence) is used
    when columns span at least two blocks, and always when there is no
    ``fetch`` (the samples are not at hand, e.g. while the model is busy).
    """
    columns = max(1, int(columns))
    if count <= 0 or t1 <= t0:
        return np.zeros(0), np.zeros(0)
    i0 = int(np.clip(np.floor((t0 - first_time) / step) - 1, 0, count))
    i1 = int(np.clip(np.ceil((t1 - first_time) / step) + 2, 0, count))
    span = i1 - i0
    if span <= 0:
        return np.zeros(0), np.zeros(0)
    per_col = span / columns
    if fetch is None:
        if envelope is None:
            return np.zeros(0), np.zeros(0)
        columns = min(columns, span)
    elif per_col <= MINMAX_FROM:
        y = np.asarray(fetch(i0, i1), dtype=np.float64)
        return first_time + step * np.arange(i0, i1, dtype=np.float64), y
    if envelope is not None and (fetch is None or per_col >= 2 * envelope.block):
        lo, hi = envelope.columns(i0, i1, columns)
    else:
        lo, hi = minmax_columns(np.asarray(fetch(i0, i1)), columns)
    edges = i0 + column_edges(span, columns)
    centre = first_time + step * 0.5 * (edges[:-1] + edges[1:] - 1)
    x = np.repeat(centre, 2)
    y = np.empty(2 * lo.shape[0])
    y[0::2] = lo
    y[1::2] = hi
    return x, y


def maxabs_columns(values: np.ndarray, first_time: float, step: float, t0: float, t1: float,
                   columns: int) -> np.ndarray:
    """Largest ``|value|`` of a uniformly timed sequence in each time column.

    A column that holds no value (a coarse level seen close up) takes the
    value nearest its centre, so each coefficient paints the columns it
    stands for.
    """
    columns = max(1, int(columns))
    count = values.shape[0]
    out = np.zeros(columns)
    if count == 0 or t1 <= t0:
        return out
    edges_t = t0 + (t1 - t0) * np.arange(columns + 1) / columns
    k = np.clip(np.ceil((edges_t - first_time) / step), 0, count).astype(np.int64)
    full = k[1:] > k[:-1]
    if full.any():
        starts = k[:-1][full]
        stop = int(k[1:][full][-1])
        seg = values[starts[0]:stop]
        mx = np.maximum.reduceat(seg, starts - starts[0])
        mn = np.minimum.reduceat(seg, starts - starts[0])
        out[full] = np.maximum(mx, -mn)
    empty = ~full
    if empty.any():
        centre = 0.5 * (edges_t[:-1] + edges_t[1:])[empty]
        idx = np.clip(np.rint((centre - first_time) / step), 0, count - 1).astype(np.int64)
        out[empty] = np.abs(values[idx])
    return out


def block_maxabs(values: np.ndarray, block: int) -> np.ndarray:
    """Largest ``|value|`` over consecutive blocks of ``block`` values (the last may be short)."""
    n = values.shape[0]
    if n == 0:
        return np.zeros(0)
    starts = np.arange(0, n, block, dtype=np.int64)
    return np.maximum(np.maximum.reduceat(values, starts), -np.minimum.reduceat(values, starts))


def maxabs_columns_from_blocks(peaks: np.ndarray, block: int, count: int, first_time: float,
                               step: float, t0: float, t1: float,
                               columns: int) -> np.ndarray | None:
    """``maxabs_columns`` from per-block peaks (``block_maxabs``) of the same sequence.

    Used when every column holds at least two blocks, so that a zoomed-out
    view reads the peaks instead of every value: each column keeps its
    largest value, its edges may move by less than one block.  None when a
    column holds fewer (the caller reads the values).
    """
    columns = max(1, int(columns))
    if count == 0 or t1 <= t0:
        return None
    edges_t = t0 + (t1 - t0) * np.arange(columns + 1) / columns
    k = np.clip(np.ceil((edges_t - first_time) / step), 0, count).astype(np.int64)
    if np.any(k[1:] - k[:-1] < 2 * block):
        return None
    b = k // block
    last = (k[1:] - 1) // block          # the block of each column's last value
    head = np.maximum.reduceat(peaks[b[0]:int(last[-1]) + 1], b[:-1] - b[0])
    return np.maximum(head, peaks[last])
