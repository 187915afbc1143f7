"""What the window shows of a long recording for one view, computed without Qt.

A view spanning at most ``EXACT_MOST`` samples is synthesised exactly
(``longview.span``): the traces are the minimum and maximum of the original
and cleaned samples in each pixel column, the Scale map the largest edited
coefficient magnitude in each column, the numbers the in-memory window
draws.  A wider view is drawn from the summary: the original trace from the
blocks' minima and maxima, the Scale map from the blocks' largest magnitude
with the band's edits applied to it (a gain scales it; hard, soft and garrote
thresholds grow with the magnitude, so the largest edited value is the edit
of the largest value; a region edit scales the blocks wholly inside it, and a
block that straddles a region's edge is worked out from its own coefficients,
read from the file (``longview.edges``): every block's figure is exact); its
cleaned and removed traces come from one pass over the whole file once the
edits settle (``longview.sweep``), drawn as far as that pass has got.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from scalesieve.core import thresholds as th
from scalesieve.core import transforms as tf
from scalesieve.views.decimate import column_edges, maxabs_columns, minmax_columns

#: views spanning at most this many samples are synthesised exactly
EXACT_MOST = 1 << 20


@dataclass
class Picture:
    """One view of one channel: samples ``start .. stop``, ``columns`` wide.

    ``times`` are the columns' centres in seconds; ``original``, ``cleaned``
    and ``removed`` are ``(lo, hi)`` per column (in a wide view the last two
    come from a sweep, NaN where it has not reached, None before it starts); ``rows`` name the Scale map's rows (d1 .. dJ, aJ), ``magnitudes``
    their largest edited |c| per column, ``(rows, columns)``.
    """

    start: int
    stop: int
    exact: bool
    times: np.ndarray
    original: tuple
    cleaned: tuple | None
    removed: tuple | None
    rows: list
    magnitudes: np.ndarray
    #: how much of the recording the cleaned trace covers (1: all; a wide view's cleaned
    #: trace comes from a pass over the whole file, ``longview.sweep``)
    cleaned_done: float = 1.0


def rows_of(level: int) -> list:
    """The Scale map's rows, finest first: 1 .. level, then the approximation."""
    return list(range(1, level + 1)) + ["a"]


def _columns_of(y: np.ndarray, columns: int) -> tuple:
    if y.shape[0] <= columns:
        return y.copy(), y.copy()
    return minmax_columns(y, columns)


def _exact(lr, t0: int, t1: int, columns: int, k: int) -> Picture:
    span = lr.synthesise(t0, t1)
    m = t1 - t0
    cols = min(columns, m)
    edges = t0 + column_edges(m, cols)
    times = 0.5 * (edges[:-1] + edges[1:] - 1) / lr.rate
    level = lr.spec.level
    keys = rows_of(level)
    mags = np.zeros((len(keys), columns))
    a, b = t0 / lr.rate, t1 / lr.rate
    for r, key in enumerate(keys):
        k0, values = span.coefficients[k].get(key, (0, np.zeros(0)))
        step, shift = tf._position_formula(key, lr.spec)
        mags[r] = maxabs_columns(values, (shift + k0 * step) / lr.rate, step / lr.rate, a, b,
                                 columns)
    x, y = span.original[:, k], span.cleaned[:, k]
    return Picture(t0, t1, True, times, _columns_of(x, cols), _columns_of(y, cols),
                   _columns_of(x - y, cols), [tf.band_name(key, level) for key in keys], mags)


def edited_peaks(peaks: np.ndarray, chain, lams, cover=None) -> tuple[np.ndarray, np.ndarray]:
    """The largest |c| of each block after a band's chain of edits (see the module's words).

    ``cover(edit)`` gives a region edit's ``(inside, straddling)`` masks over the
    blocks (wholly inside the region; partly inside); returns ``(peaks, straddling)``:
    the edited peaks, exact where ``straddling`` is False (those blocks need their
    own coefficients).
    """
    m = np.abs(np.asarray(peaks, dtype=np.float64))
    straddling = np.zeros(m.shape[0], dtype=bool)
    t = 0
    for e in chain:
        if e.op == "gain":
            m = m * abs(float(e.gain))
        elif e.op == "threshold":
            m = np.abs(th.apply_shape(m, float(lams[t]), e.shape))
            t += 1
        elif e.op == "region" and cover is not None:
            inside, part = cover(e)
            m = np.where(inside, m * abs(float(e.gain)), m)
            straddling |= part
    return m, straddling


def region_cover(band, starts: np.ndarray, stops: np.ndarray):
    """``cover`` for ``edited_peaks``: blocks holding coefficients ``starts .. stops`` of
    ``band`` (a ``stream.recipe_plan._Band``) against a region edit's coefficients."""
    from scalesieve.core.edits import region_slice

    def cover(e):
        sl = region_slice(e, band.ctx)
        if sl.stop <= sl.start:
            none = np.zeros(starts.shape[0], dtype=bool)
            return none, none
        inside = (starts >= sl.start) & (stops <= sl.stop)
        meets = (starts < sl.stop) & (stops > sl.start)
        return inside, meets & ~inside
    return cover


def band_peaks(lr, k: int, key, t0: int, t1: int, columns: int) -> tuple[np.ndarray, np.ndarray]:
    """``(centres in samples, largest edited |c|)`` of band ``key``'s summary blocks in view;
    blocks at a region's edge from their own coefficients (``longview.edges``)."""
    series = lr.summary.bands[k][key]
    table, a, b = series.blocks_in(t0, t1, columns)
    times, blo, bhi, _ = series.window(t0, t1, columns)
    band = lr.plan.bands[k][key]
    starts, stops = series.values_of(table, a, b)
    peaks, straddling = edited_peaks(np.maximum(np.abs(blo), np.abs(bhi)), band.chain,
                                     band.lams, region_cover(band, starts, stops))
    for i in np.flatnonzero(straddling):
        c = lr.ranges.coefficients(k, key, int(starts[i]), int(stops[i]))
        e = band.edited(c, int(starts[i]))
        peaks[i] = float(np.max(np.abs(e))) if e.size else 0.0
    return times, peaks


def _binned(times: np.ndarray, lo: np.ndarray, hi: np.ndarray, t0: float, t1: float,
            columns: int) -> tuple:
    """Blocks centred at ``times`` folded into columns: each column's lowest and highest;
    a column no block's middle lies in takes the block nearest before its middle."""
    edges = t0 + (t1 - t0) * np.arange(columns + 1) / columns
    k = np.searchsorted(times, edges, side="left")
    out_lo, out_hi = np.zeros(columns), np.zeros(columns)
    full = k[1:] > k[:-1]
    if full.any() and lo.shape[0]:
        starts = k[:-1][full]
        stop = int(k[1:][full][-1])
        out_lo[full] = np.minimum.reduceat(lo[starts[0]:stop], starts - starts[0])
        out_hi[full] = np.maximum.reduceat(hi[starts[0]:stop], starts - starts[0])
    empty = ~full
    if empty.any() and lo.shape[0]:
        centre = 0.5 * (edges[:-1] + edges[1:])[empty]
        idx = np.clip(np.searchsorted(times, centre, side="right") - 1, 0, lo.shape[0] - 1)
        out_lo[empty], out_hi[empty] = lo[idx], hi[idx]
    return out_lo, out_hi


def _swept(series, done: int, t0: int, t1: int, columns: int, edges: np.ndarray) -> tuple:
    """A sweep's figures in columns; columns past what it has done are NaN (not drawn)."""
    times, lo, hi, _ = series.window(t0, min(t1, max(done, t0 + 1)), columns)
    out = _binned(times, lo, hi, t0, t1, columns)
    past = 0.5 * (edges[:-1] + edges[1:]) >= done
    return tuple(np.where(past, np.nan, v) for v in out)


def _from_summary(lr, t0: int, t1: int, columns: int, k: int, sweep=None) -> Picture:
    # columns are binned in samples (whole numbers: block starts fall on exact edges)
    s, rate, level = lr.summary, lr.rate, lr.spec.level
    times, lo, hi, _ = s.signal[k].window(t0, t1, columns)
    original = _binned(times, lo, hi, t0, t1, columns)
    edges = t0 + (t1 - t0) * np.arange(columns + 1) / columns
    cleaned = removed = None
    done = 0.0
    if not lr.edits:                       # nothing edited: cleaned is the original
        cleaned, removed, done = original, (np.zeros(columns), np.zeros(columns)), 1.0
    elif sweep is not None and sweep.channel == k and sweep.edits == lr.edits and sweep.done:
        cleaned = _swept(sweep.cleaned, sweep.done, t0, t1, columns, edges)
        removed = _swept(sweep.removed, sweep.done, t0, t1, columns, edges)
        done = 1.0 if sweep.finished else sweep.done / lr.n
    keys = rows_of(level)
    mags = np.zeros((len(keys), columns))
    for r, key in enumerate(keys):
        bt, peaks = band_peaks(lr, k, key, t0, t1, columns)
        _, mags[r] = _binned(bt, peaks, peaks, t0, t1, columns)
    return Picture(t0, t1, False, 0.5 * (edges[:-1] + edges[1:]) / rate, original, cleaned,
                   removed, [tf.band_name(key, level) for key in keys], mags, done)


def picture(lr, t0: int, t1: int, columns: int, channel: int = 0,
            exact_most: int = EXACT_MOST, sweep=None) -> Picture:
    """The view ``t0 .. t1`` (samples, clipped) of ``lr`` (a ``LongRecording``), ``columns`` wide;
    ``sweep``: a ``longview.sweep.CleanedSweep`` for a wide view's cleaned trace."""
    t0, t1 = max(0, int(t0)), min(lr.n, int(t1))
    t1 = max(t1, min(lr.n, t0 + 1))
    columns = max(1, int(columns))
    if t1 - t0 <= exact_most:
        return _exact(lr, t0, t1, columns, channel)
    return _from_summary(lr, t0, t1, columns, channel, sweep)


def snap_to_tiles(spec: tf.TransformSpec, n: int, rate: float, keys, t0_s: float,
                  t1_s: float) -> tuple[float, float]:
    """``[t0_s, t1_s]`` widened to whole coefficient tiles of the coarsest band in ``keys``.

    A coefficient's tile is its time position ± half its band's spacing; the
    finer bands' tiles nest inside the coarsest one's (as the in-memory
    Scale map snaps a drawn region).
    """
    lengths = tf.band_lengths(n, spec)
    key = max(keys, key=lambda k: tf._position_formula(k, spec)[0])
    step, shift = tf._position_formula(key, spec)
    count = max(1, lengths[tf.band_index(key, spec.level)])
    k0 = int(np.clip(np.floor((t0_s * rate - shift) / step + 0.5), 0, count - 1))
    k1 = int(np.clip(np.ceil((t1_s * rate - shift) / step - 0.5), k0, count - 1))
    start = (shift + (k0 - 0.5) * step) / rate
    stop = (shift + (k1 + 0.5) * step) / rate
    dur = n / rate
    return max(0.0, start), min(dur, stop) if stop > 0 else dur
