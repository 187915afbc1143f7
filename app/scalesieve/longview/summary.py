"""A long recording's multi-resolution summary: per-block minimum, maximum and energy.

One streamed forward DWT (``stream.dwt.ForwardStream``) over the whole file
gives, for every channel, the signal and every band's coefficients cut into
blocks of ``2^BASE`` samples (a band at level j in blocks of ``2^(BASE-j)``
coefficients, at least one), each block's minimum, maximum and sum of
squares; coarser tables merge ``2^STEP`` blocks at a time, so a view of any
width reads a table with about as many blocks as it has pixel columns.  The
same pass counts each band's magnitudes in bins for its median; when a
threshold first needs a band's noise, one more pass to that band's depth
keeps the few values the exact median needs (``stream.statistics``): the
number ``numpy.median`` gives.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass, field

import numpy as np

from scalesieve.core import transforms as tf
from scalesieve.stream import statistics as st

#: the finest table's blocks hold 2^BASE samples
BASE = 10
#: each coarser table merges 2^STEP blocks of the one below
STEP = 2
#: magnitudes gathered before they are counted into a median's bins
COUNT_BATCH = 1 << 20
#: held while a pass finds medians (a window may start one ahead of the first threshold)
_FINDING = threading.Lock()


@dataclass
class Series:
    """Blocks of one signal or band: ``lo``, ``hi``, ``energy`` per block at each table.

    ``tables[0]`` is the finest (``block`` values a block, the last one
    shorter); ``tables[i]`` merges ``2^(STEP*i)`` of its blocks.  ``step`` and
    ``shift`` place value k at sample ``step * k + shift``.
    """

    block: int
    count: int
    step: float
    shift: float
    tables: list = field(default_factory=list)     # [(lo, hi, energy), ...]

    @classmethod
    def from_blocks(cls, block, count, step, shift, lo, hi, energy) -> "Series":
        s = cls(block, count, step, shift, [(lo, hi, energy)])
        while s.tables[-1][0].shape[0] > 1:
            lo, hi, en = s.tables[-1]
            starts = np.arange(0, lo.shape[0], 1 << STEP)
            s.tables.append((np.minimum.reduceat(lo, starts), np.maximum.reduceat(hi, starts),
                             np.add.reduceat(en, starts)))
        return s

    def block_samples(self, table: int) -> float:
        """Samples one block of ``table`` spans."""
        return self.block * self.step * (1 << (STEP * table))

    def table_for(self, samples_per_column: float) -> int:
        """The coarsest table whose blocks are no wider than a column."""
        t = 0
        while t + 1 < len(self.tables) and self.block_samples(t + 1) <= samples_per_column:
            t += 1
        return t

    def blocks_in(self, t0: float, t1: float, columns: int) -> tuple[int, int, int]:
        """``(table, a, b)``: blocks ``a .. b`` of the table fitting ``columns`` meet ``t0 .. t1``."""
        t = self.table_for((t1 - t0) / max(1, columns))
        width = self.block_samples(t)
        a = max(0, int(np.floor((t0 - self.shift) / width)))
        b = min(self.tables[t][0].shape[0], int(np.ceil((t1 - self.shift) / width)))
        return t, a, b

    def values_of(self, table: int, a: int, b: int) -> tuple[np.ndarray, np.ndarray]:
        """``(starts, stops)``: the value indices blocks ``a .. b`` of ``table`` hold."""
        size = self.block << (STEP * table)
        starts = np.arange(a, b, dtype=np.int64) * size
        return starts, np.minimum(starts + size, self.count)

    def window(self, t0: float, t1: float, columns: int):
        """``(centres, lo, hi, energy)`` of the blocks of the fitting table that meet ``t0 .. t1``;
        ``centres`` in samples (a full block's middle)."""
        t, a, b = self.blocks_in(t0, t1, columns)
        lo, hi, en = self.tables[t]
        width = self.block_samples(t)
        times = self.shift + width * (np.arange(a, b, dtype=np.float64) + 0.5)
        return times, lo[a:b], hi[a:b], en[a:b]


class _Blocker:
    """Cuts values handed in in order into blocks of ``block`` and keeps each block's figures."""

    def __init__(self, block: int):
        self.block = block
        self.pending = np.zeros(0)
        self.parts: list = []
        self.count = 0

    def add(self, values: np.ndarray) -> None:
        v = np.asarray(values, dtype=np.float64)
        self.count += v.shape[0]
        if self.pending.shape[0]:
            v = np.concatenate([self.pending, v])
        full = v.shape[0] - v.shape[0] % self.block
        if full:
            self._keep(v[:full].reshape(-1, self.block))
        self.pending = v[full:].copy()

    def _keep(self, r: np.ndarray) -> None:
        self.parts.append((r.min(axis=1), r.max(axis=1), np.einsum("ij,ij->i", r, r)))

    def finish(self):
        if self.pending.shape[0]:
            self._keep(self.pending.reshape(1, -1))
            self.pending = np.zeros(0)
        if not self.parts:
            return np.zeros(0), np.zeros(0), np.zeros(0)
        return tuple(np.concatenate([p[i] for p in self.parts]) for i in range(3))


@dataclass
class Summary:
    """What the window draws a long recording from when zoomed out, and the bands' medians.

    ``signal[k]`` and ``bands[k][key]`` are ``Series``; ``counts[k][key]`` the
    first pass of each band's median (``(bins, counts)`` of its magnitudes'
    leading bits, the non-empty bins only); ``medians[k][key]`` is
    ``median(|c|)`` over the band's non-zero coefficients once
    ``find_medians`` has made the second pass for it, else None.
    """

    n: int
    rate: float
    channels: int
    spec: tf.TransformSpec
    signal: list
    bands: list
    counts: list
    medians: list
    #: (path, channel, file facts) it was made from, for writing it back (cache.keep)
    kept_as: tuple | None = None

    def sigma(self, k: int, key) -> float:
        """MAD noise of band ``key`` of channel ``k`` (Donoho & Johnstone 1994)."""
        from scalesieve.core import thresholds as th

        return self.medians[k][key] / th.MAD_TO_SIGMA

    def missing(self, wanted) -> list:
        """The ``(k, key)`` of ``wanted`` whose median is not known yet."""
        return [(k, key) for k, key in wanted if self.medians[k][key] is None]

    def find_medians(self, source, wanted, progress=None, cancelled=None) -> bool:
        """The exact medians of the bands ``wanted`` (``(k, key)``), in one pass over
        ``source`` to the deepest level they need; False when all were known."""
        with _FINDING:                  # one pass at a time; a second caller finds it done
            return self._find(source, wanted, progress, cancelled)

    def _find(self, source, wanted, progress, cancelled) -> bool:
        from scalesieve.stream.wrap import forward_stream

        todo = self.missing(wanted)
        if not todo:
            return False
        level = self.spec.level
        depth = max(level if key == "a" else int(key) for _, key in todo)
        meds = {}
        for k, key in todo:
            m = st.MedianOfMagnitudes()
            bins, cnt = self.counts[k][key]
            m.counts[np.asarray(bins, dtype=np.intp)] = np.asarray(cnt, dtype=np.int64)
            m.end_pass()                                # the first pass, from the summary
            meds[(k, key)] = m

        def put_for(k):
            def put(key, k0, c):
                m = meds.get((k, key))
                if m is not None and m.stage == "keep":
                    m.add(c)
            return put
        chans = sorted({k for k, _ in todo})
        streams = {k: forward_stream(source, self.spec, put_for(k), k, depth=depth)
                   for k in chans}
        for block in source.blocks():
            if cancelled is not None and cancelled():
                raise InterruptedError("noise pass cancelled")
            for k, f in streams.items():
                f.feed(np.ascontiguousarray(block[:, k]))
            if progress:
                progress(streams[chans[0]].fed / max(1, self.n), "finding the noise of the bands")
        for (k, key), m in meds.items():
            if m.stage != "done":
                m.end_pass()
            self.medians[k][key] = float(m.value)
        return True


def band_block(key, level: int) -> int:
    """Coefficients one finest block of band ``key`` holds."""
    j = level if key == "a" else int(key)
    return max(1, 1 << max(0, BASE - j))


def _sparse(m: st.MedianOfMagnitudes) -> tuple:
    bins = np.flatnonzero(m.counts)
    return bins.astype(np.int32), m.counts[bins].astype(np.int64)


def build(source, spec: tf.TransformSpec, progress=None, cancelled=None) -> Summary:
    """The summary of ``source`` (``stream.pipeline._Source``: ``blocks()``, ``frames``,
    ``rate``, ``channels``) under the resolved DWT ``spec`` in any mode, in one pass
    (``periodic`` and ``periodization`` read the recording's ends first); ``progress(fraction, text)`` as it goes;
    ``cancelled()`` true stops it (``InterruptedError``)."""
    from scalesieve.stream.dwt import can_stream
    from scalesieve.stream.wrap import WRAP_MODES, forward_stream

    if not (can_stream(spec) or (spec.kind == "dwt" and spec.mode in WRAP_MODES)):
        raise ValueError(f"the {spec.kind} in mode {spec.mode} has no summary in blocks")
    n, level, chans = source.frames, spec.level, source.channels
    keys = tf.band_keys(level)
    signal = [_Blocker(1 << BASE) for _ in range(chans)]
    blockers = [{key: _Blocker(band_block(key, level)) for key in keys} for _ in range(chans)]
    medians = [{key: st.MedianOfMagnitudes() for key in keys} for _ in range(chans)]

    # counting bins costs a pass over all 2^20 of them per call: count in batches
    pending = [{key: [] for key in keys} for _ in range(chans)]
    held = [dict.fromkeys(keys, 0) for _ in range(chans)]

    def count(k, key):
        parts = pending[k][key]
        if parts:
            medians[k][key].add(np.concatenate(parts))
            pending[k][key], held[k][key] = [], 0

    def put_for(k):
        def put(key, k0, c):
            pending[k][key].append(np.abs(c))
            held[k][key] += c.shape[0]
            if held[k][key] >= COUNT_BATCH:
                count(k, key)
            blockers[k][key].add(c)
        return put
    streams = [forward_stream(source, spec, put_for(k), k) for k in range(chans)]
    for block in source.blocks():
        if cancelled is not None and cancelled():
            raise InterruptedError("summary cancelled")
        for k, f in enumerate(streams):
            signal[k].add(block[:, k])
            f.feed(np.ascontiguousarray(block[:, k]))
        if progress:
            progress(streams[0].fed / max(1, n), "summarising the recording")
    sig, bands, counts = [], [], []
    for k in range(chans):
        for key in keys:
            count(k, key)
        sig.append(Series.from_blocks(1 << BASE, n, 1.0, 0.0, *signal[k].finish()))
        per = {}
        for key in keys:
            b = blockers[k][key]
            step, shift = tf._position_formula(key, spec)
            per[key] = Series.from_blocks(b.block, b.count, step, shift, *b.finish())
        bands.append(per)
        counts.append({key: _sparse(medians[k][key]) for key in keys})
    if progress:
        progress(1.0, "summary ready")
    return Summary(n, float(source.rate), chans, spec, sig, bands, counts,
                   [dict.fromkeys(keys) for _ in range(chans)])
