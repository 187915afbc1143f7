"""`events` on a recording longer than memory: the same events, found block by block.

Detection (``core.events``) looks only at the coefficients that read
samples of the recording alone, with each level's MAD noise over those
coefficients.  Both transforms give those coefficients block by block: the
DWT through the forward cascade, the SWT (whose whole-array form wraps
around a padded recording, but not for these coefficients) through
``pywt.swt`` on windows of samples wide enough for every tap.  Four passes
over the file: two for the exact medians (``statistics``), one for the
exceedances (merged into runs per level as ``core.events`` merges them),
one for the signal's peak in each event.
"""

from __future__ import annotations

import warnings

import numpy as np
import pywt

from scalesieve.core import events as ev
from scalesieve.core import transforms as tf
from scalesieve.errors import ScalesieveError
from scalesieve.stream import statistics as st
from scalesieve.stream.wrap import forward_stream
from scalesieve.stream.sources import READ_FRAMES, _Source, open_source


class SwtStream:
    """Detail coefficients of the normalised SWT (``pywt.swt``, ``norm=True``) in blocks.

    Hands out, per level, the coefficients ``i`` whose samples
    ``i + reach[0] .. i + reach[1]`` lie in the recording; each block is the
    interior of ``pywt.swt`` on a window holding every sample it reads.
    """

    def __init__(self, n: int, spec: tf.TransformSpec, levels, put, block: int = READ_FRAMES):
        self.n, self.spec, self.put, self.block = n, spec, put, block
        self.levels = sorted(levels)
        self.top = max(self.levels)
        reaches = [ev.support(spec, j) for j in self.levels]
        self.rmin = min(r[0] for r in reaches)
        self.rmax = max(r[1] for r in reaches)
        self.x = tf._Carry(0, np.float64)
        # the coefficients that read no padding at one level at least
        self.next = min(max(0, -r[0]) for r in reaches)
        self.end = max(self.next, max(n - r[1] for r in reaches))

    def feed(self, samples: np.ndarray) -> None:
        self.x.append(samples)
        while self.next < self.end:
            p = self.next
            q = min(self.end, p + self.block)
            ws, we = max(0, p + self.rmin), min(self.n, q + self.rmax)
            if self.x.hi < we:
                return
            win = self.x.view(ws, we)
            step = 2 ** self.top
            pad = -(we - ws) % step
            if pad:
                win = np.concatenate([win, np.zeros(pad)])
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", UserWarning)   # biorthogonal energy warning
                c = pywt.swt(win, self.spec.wavelet, level=self.top, trim_approx=True,
                             norm=True)
            for j in self.levels:
                self.put(j, p, c[self.top - j + 1][p - ws:q - ws])
            self.next = q
            self.x.drop_below(max(0, q + self.rmin))


class _Level:
    """One level's geometry (as ``core.events.prepare`` works it out) and noise."""

    def __init__(self, spec: tf.TransformSpec, j: int, n: int):
        count = (tf.band_lengths(n, spec)[tf.band_index(j, spec.level)] if spec.kind == "dwt"
                 else tf.swt_padded_length(n, spec.level))
        p = tf.coefficient_positions(j, spec, 2)
        self.level = j
        self.centre0, self.step = float(p[0]), int(round(p[1] - p[0]))
        self.reach = ev.support(spec, j)
        self.i0 = min(count, max(0, -(self.reach[0] // self.step)))
        self.i1 = min(count, max(self.i0, (n - 1 - self.reach[1]) // self.step + 1))
        self.median = st.MedianOfMagnitudes()
        self.runs: list = []

    def inside(self, k0: int, c: np.ndarray) -> tuple[int, np.ndarray]:
        a, b = max(k0, self.i0), min(k0 + c.shape[0], self.i1)
        return a, (c[a - k0:b - k0] if b > a else c[:0])

    def band(self, k0: int, c: np.ndarray) -> ev.LevelBand:
        return ev.LevelBand(level=self.level, coeffs=c, index0=k0, step=self.step,
                            centre0=self.centre0, reach=self.reach, sigma=self.median.sigma())


def events_stream(input_path: str, spec: tf.TransformSpec, levels, k: float, *,
                  channel=None, rate: float | None = None, progress=None, source=None):
    """``core.events.detect_channels`` of a recording read block by block.

    ``spec`` is resolved for the recording and ``levels`` checked (as the
    command does).  Returns ``(events, noise, facts)`` with ``facts`` the
    ``rate``, ``samples``, ``channels``, ``channel_names``, ``pick`` (the
    file's index of the one channel read, or None), ``start_time`` and
    ``warnings``.  ``source``: the recording already opened (``open_source``).
    """
    src = open_source(input_path, channel, rate) if source is None else source
    pick = src.pick
    n, top = src.frames, max(levels)
    k = ev.check_k(k)
    chans = [{j: _Level(spec, j, n) for j in levels} for _ in range(src.channels)]

    def source(put, c):
        if spec.kind == "dwt":
            return forward_stream(src, spec, put, c, top)
        return SwtStream(n, spec, levels, put)

    def run(work, what, p):
        streams = []
        for c in range(src.channels):
            def put(j, k0, values, lv=chans[c]):
                if j in lv:
                    work(lv[j], *lv[j].inside(k0, values))
            streams.append(source(put, c))
        done = 0
        for block in src.blocks():
            for c, s in enumerate(streams):
                s.feed(block[:, c])
            done += block.shape[0]
            if progress:
                progress(min(1.0, (p + done / n) / 4), what)

    for p in range(2):
        run(lambda lv, k0, c: lv.median.add(c), "finding each level's noise", p)
        for lv in chans:
            for level in lv.values():
                if level.median.stage != "done":
                    level.median.end_pass()

    def exceed(lv, k0, c):
        if c.size and lv.median.sigma() > 0.0:
            r = ev._level_runs(lv.band(k0, c), k)
            if r is not None:
                lv.runs.append(r)
    run(exceed, "finding events", 2)

    spans = []
    for c in range(src.channels):
        runs = [tuple(np.concatenate(col) for col in zip(*lv.runs))
                for lv in chans[c].values() if lv.runs]
        spans.append(runs)
    # the events' extents first, with their peaks left for one more pass
    found, pending = [], []
    for c, runs in enumerate(spans):
        holder = {}

        def later(s0, s1, holder=holder):
            holder["s0"], holder["s1"] = s0, s1
            return np.zeros(s0.shape[0])
        evs = ev.events_from_runs(runs, n, src.rate, c, later)
        pending.append((evs, holder))
    peaks = _peaks(src, [h for _, h in pending])
    for c, (evs, holder) in enumerate(pending):
        found.extend(e._replace(peak=float(v)) for e, v in zip(evs, peaks[c]))
    if progress:
        progress(1.0, "events found")
    found.sort(key=lambda e: (e.start_s, e.channel))
    noise = [{"level": j, "sigma": lv.median.sigma(), "channel": c}
             for c in range(src.channels) for j, lv in sorted(chans[c].items())]
    return found, noise, {"rate": src.rate, "samples": n, "channels": src.channels,
                          "channel_names": list(src.names), "pick": pick,
                          "start_time": src.start_time, "warnings": src.warnings()}


def _peaks(src: _Source, holders: list[dict]) -> list[np.ndarray]:
    """Largest |x| over each event's samples, per channel, in one pass over the file."""
    out = [np.zeros(h["s0"].shape[0]) if h else np.zeros(0) for h in holders]
    start = 0
    for block in src.blocks():
        stop = start + block.shape[0]
        for c, h in enumerate(holders):
            if not h:
                continue
            s0, s1 = h["s0"], h["s1"]
            a = int(np.searchsorted(s1, start, side="left"))
            b = int(np.searchsorted(s0, stop, side="left"))
            if b > a:
                lo = np.maximum(s0[a:b], start) - start
                hi = np.minimum(s1[a:b], stop - 1) - start
                vals = ev._peak_between(block[:, c], lo, hi)
                np.maximum(out[c][a:b], vals, out=out[c][a:b])
        start = stop
    return out
