"""Where impacts live: the kurtosis of every packet band over depths 1 .. J.

The statistic is the Pearson kurtosis (4th central moment over the squared
variance) of each packet band's own coefficients, the same figure ``bands``
reports as ``kurtosis``: about 3 for Gaussian noise, large where short
bursts stand out of a band.  The table of it over depth and frequency is a
wavelet-packet form of Antoni's kurtogram, and the band where it is largest
is the band to demodulate.  Antoni's spectral kurtosis of a complex band
signal, E|c|^4 / (E|c|^2)^2 - 2, is 0 for Gaussian noise; ours is read on
the real coefficients, so its Gaussian level is 3, and both rank bands alike
for impulsive signals.

References
----------
J. Antoni, "The spectral kurtosis: a useful tool for characterising
non-stationary signals", Mech. Syst. Signal Process. 20:282-307, 2006.
J. Antoni, "Fast computation of the kurtogram for the detection of transient
faults", Mech. Syst. Signal Process. 21:108-124, 2007.
"""

from __future__ import annotations

import threading
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pywt

from scalesieve.core import packet_moments as pm
from scalesieve.core import packet_walk
from scalesieve.core import packets as wp
from scalesieve.core import threads as th

#: the depth the table goes to unless told
DEFAULT_DEPTH = 6
#: from this many samples the work is shared among threads (core/threads.py)
THREADS_FROM = 1 << 20
#: raw moments serve while mean^2 is at most this share of the mean square:
#: cancellation then costs under 1e-14 relative (rel. error ~ eps (mean/sd)^4)
RAW_MEAN_SHARE = 1e-3
#: samples per block of the moment sums (cache-sized)
MOMENT_BLOCK = pm.MOMENT_BLOCK
#: fewest coefficients per piece at the deepest depth when the signal is cut in pieces
PIECE_FROM = 1 << 12
#: time pieces per thread, and tasks per thread at each depth (a piece's nodes in
#: groups): a thread held up by other work leaves the rest to the others
PIECES_PER_THREAD = 2
TASKS_PER_THREAD = 4


def _raw_sums(c: np.ndarray, buf: np.ndarray) -> np.ndarray:
    """[sum c, sum c^2, sum c^3, sum c^4], block by block (``buf`` is written over).

    ``c`` is read from memory once; each block's squares stay in cache.
    """
    return pm.add_blocks(pm.block_sums(c[a:b], buf) for a, b in pm.blocks(0, c.shape[0]))


def _from_sums(c: np.ndarray, sums: np.ndarray, work: np.ndarray | None) -> float | None:
    """Pearson kurtosis of ``c`` given its raw sums (:func:`_raw_sums`)."""
    return _kurtosis_of(c.shape[0], sums, lambda: c, work)


def _kurtosis_of(n: int, sums: np.ndarray, data, work: np.ndarray | None) -> float | None:
    """Pearson kurtosis of n values with raw sums ``sums``; ``data()`` makes the values,
    called only when the mean is too large for the raw moments (a second pass)."""
    mean, s2, s3, s4 = sums[0] / n, sums[1] / n, sums[2] / n, sums[3] / n
    m2 = s2 - mean * mean
    if m2 > 0 and mean * mean <= RAW_MEAN_SHARE * s2:
        # the mean is small beside the spread (detail nodes): the central moments
        # from the raw ones lose nothing to cancellation
        m4 = s4 - 4 * mean * s3 + 6 * mean * mean * s2 - 3 * mean ** 4
        return m4 / (m2 * m2) if m4 > 0 else None
    c = data()
    d = np.subtract(c, mean, out=None if work is None or work.shape[0] < n else work[:n])
    m2 = float(np.einsum("i,i->", d, d)) / n
    if not m2 > 0:
        return None
    np.multiply(d, d, out=d)
    m4 = float(np.einsum("i,i->", d, d)) / n
    return m4 / (m2 * m2)


def kurtosis(c: np.ndarray, work: np.ndarray | None = None) -> float | None:
    """Pearson kurtosis of one band's coefficients (None for a band that carries nothing).

    ``work``, a float64 array at least ``MOMENT_BLOCK`` long (or as long as ``c``),
    is written over: with it no temporary is made (fresh memory costs more here
    than the arithmetic).
    """
    c = np.asarray(c, dtype=np.float64)
    if c.shape[0] < 4:
        return None
    buf = np.empty(min(c.shape[0], MOMENT_BLOCK)) if work is None else work
    return _from_sums(c, _raw_sums(c, buf), work)


def kurtosis_pair(c: np.ndarray, left: int, right: int, minimum: int,
                  work: np.ndarray | None = None) -> tuple[float | None, float | None]:
    """(kurtosis of all of ``c``, of its interior ``c[left:len - right]``) in one read.

    The interior's sums are taken once and the few edge coefficients' added
    for the whole: the same figures as :func:`kurtosis` of each, up to
    round-off.  The interior's is None with fewer than ``max(4, minimum)``
    coefficients (as ``band_choice.interior_kurtosis``), both are None where
    the band carries nothing.
    """
    c = np.asarray(c, dtype=np.float64)
    n = c.shape[0]
    if n < 4:
        return None, None
    buf = np.empty(min(n, MOMENT_BLOCK)) if work is None else work
    stop = n - right
    if stop - left < max(4, minimum):
        return _from_sums(c, _raw_sums(c, buf), work), None
    inner = c[left:stop]
    inside = _raw_sums(inner, buf)
    whole = inside + _raw_sums(c[:left], buf) + _raw_sums(c[stop:], buf)
    k = _from_sums(c, whole, work)
    if k is None:
        return None, None
    return k, _from_sums(inner, inside, work)


def table(x: np.ndarray, rate: float, wavelet: str = "db4", mode: str = "symmetric",
          depth: int = DEFAULT_DEPTH, keep_best: bool = False, check=None,
          threads: int | None = None) -> dict:
    """Kurtosis of every packet band of depths 1 .. ``depth``, and the most impulsive.

    Returns ``{"levels": [{"level": j, "bands": [{"name", "low_hz", "high_hz",
    "kurtosis", "interior_kurtosis", "path"}, ...]}], "best": {...}}`` with
    bands in frequency order; ``kurtosis`` is of all the band's coefficients,
    ``interior_kurtosis`` of those the boundary extension did not touch (None
    with fewer than ``band_choice.MIN_INTERIOR``).  ``best`` is the band with
    the largest ``interior_kurtosis`` (see ``core.band_choice``) and adds
    ``"level"``; when no band has that many (a short recording) it is the band
    with the largest ``kurtosis``.  Ties go to the shallower (wider) band.
    With ``keep_best`` also ``"best_coefficients"``: the best node's
    coefficients (``WaveletPacket(x)[path].data``), kept as the tree is walked.
    ``check()``, if given, is called before each depth and may raise to stop
    (the window's worker stops a table nobody waits for any more).
    ``threads`` (default ``core.threads.count()``) share the work from
    ``THREADS_FROM`` samples on; the figures are the same for any count.  Where
    the compiled core is installed and the mode extends the edges, a long
    signal's tree is walked piece by piece in the cache (``core.packet_walk``,
    ``check()`` then called before each piece); otherwise the signal is cut in
    a few time pieces (``core.packet_moments``), each depth's work handed out
    in a few tasks per thread, the next depth started before this one's
    figures are added up.
    """
    x = np.asarray(x, dtype=np.float64)
    top = pywt.dwt_max_level(x.shape[0], pywt.Wavelet(wavelet).dec_len)
    if depth < 1:
        raise ValueError(f"depth {depth} must be at least 1")
    if depth > top:
        raise ValueError(f"depth {depth} is deeper than {x.shape[0]} samples allow for "
                         f"{wavelet} (at most {top})")
    w = pywt.Wavelet(wavelet)
    from scalesieve.core import band_choice

    n = x.shape[0]
    workers = th.count(threads) if n >= THREADS_FROM else 1
    edges = band_choice.dwt_edges(n, w.dec_len, depth)
    if packet_walk.usable(n, w, mode, depth):
        return _walked_table(x, rate, w, mode, depth, keep_best, check, workers, edges)
    pieces = 1
    if workers > 1 and pm.splittable(w, mode):
        deepest = pywt.dwt_coeff_len(n, w.dec_len, mode) >> (depth - 1)
        pieces = max(1, min(PIECES_PER_THREAD * workers, deepest // PIECE_FROM))
    plan = pm.Plan(n, w, mode, depth, pieces)
    levels = []
    choice = _Choice()
    # each piece's stretch of every node of the current depth
    stretches = [{"": x[lo:hi]} for lo, hi in plan.need[0]]
    pool = ThreadPoolExecutor(max_workers=workers) if workers > 1 else None
    local = threading.local()

    def buffer():
        buf = getattr(local, "buf", None)
        if buf is None:
            buf = local.buf = np.empty(MOMENT_BLOCK)   # one per thread, reused
        return buf

    def task(item):
        piece, group, j, segments = item
        return piece, pm.advance(plan, piece, j, group, w, mode, segments, buffer())

    def layout(j):
        return _segments(plan.lengths[j], *edges[j - 1])

    def start(j, stretches):
        """Depth j's work: each piece's parents, in groups when pieces are fewer than
        threads (one piece: the nodes shared out); running in the pool if there is one."""
        if check is not None:
            check()
        segments = layout(j)[0]
        groups = max(1, TASKS_PER_THREAD * workers // plan.pieces) if pool else 1
        items = []
        for piece, parents in enumerate(stretches):
            paths = sorted(parents)
            size = -(-len(paths) // groups)
            for g in range(0, len(paths), size):
                items.append((piece, {p: parents[p] for p in paths[g:g + size]}, j, segments))
        return [pool.submit(task, it) for it in items] if pool else [task(it) for it in items]

    try:
        pending = start(1, stretches)
        del stretches
        for j in range(1, depth + 1):
            made = [{} for _ in range(plan.pieces)]
            for done in pending:
                piece, part = done.result() if pool else done
                made[piece].update(part)
            stretches = [{p: c for p, (c, _) in part.items()} for part in made]
            # the next depth is under way in the pool while this one's figures are added up
            pending = start(j + 1, stretches) if j < depth else []
            segments, short = layout(j)
            buf = buffer()
            rows = []
            for path in sorted(stretches[0], key=wp.freq_index):
                mine = [part[path] for part in stretches]
                sums = [part[path][1] for part in made]
                k, inner = _node_kurtosis(plan, j, mine, sums, segments, short, buf)
                rows.append(_row(j, path, rate, k, inner))
                choice.offer(rows[-1], j, (j, mine) if keep_best else None)
            levels.append({"level": j, "bands": rows})
            del made, stretches
    finally:
        if pool:
            pool.shutdown(cancel_futures=True)
    best, best_ref = choice.result()
    out = {"levels": levels, "best": best}
    if keep_best:
        out["best_coefficients"] = None if best_ref is None else pm.join(
            pm.owned_parts(plan, best_ref[0], best_ref[1], 0, plan.lengths[best_ref[0]]))
    return out


def _walked_table(x: np.ndarray, rate: float, w, mode: str, depth: int, keep_best: bool,
                  check, workers: int, edges: list) -> dict:
    """:func:`table` from ``packet_walk.node_sums`` (the same rows and choice of best)."""
    lengths = [x.shape[0]]
    for _ in range(depth):
        lengths.append(pywt.dwt_coeff_len(lengths[-1], w.dec_len, mode))
    layouts = [_segments(lengths[j], *edges[j - 1]) for j in range(1, depth + 1)]
    sums = packet_walk.node_sums(x, w, mode, depth, [seg for seg, _ in layouts], workers, check)
    cache: dict[str, np.ndarray] = {"": x}

    def data(path: str) -> np.ndarray:   # only for a second pass or the best band's data
        if path not in cache:
            cache[path] = packet_walk.node_data(data(path[:-1]), w, mode, path[-1])
        return cache[path]

    levels, choice = [], _Choice()
    for j in range(1, depth + 1):
        segments, short = layouts[j - 1]
        m = lengths[j]
        paths = ["".join("ad"[(r >> (j - 1 - i)) & 1] for i in range(j)) for r in range(1 << j)]
        rows = []
        for r in sorted(range(1 << j), key=lambda r: wp.freq_index(paths[r])):
            path = paths[r]
            k, inner = _pair_from_sums(m, sums[j - 1][r], segments, short,
                                       lambda: data(path))
            rows.append(_row(j, path, rate, k, inner))
            choice.offer(rows[-1], j)
        levels.append({"level": j, "bands": rows})
    best = choice.result()[0]
    out = {"levels": levels, "best": best}
    if keep_best:
        out["best_coefficients"] = None if best is None else data(best["path"])
    return out


def _node_kurtosis(plan, j: int, stretches: list, sums: list, segments: list, short: bool,
                   buf: np.ndarray) -> tuple[float | None, float | None]:
    """(kurtosis, interior kurtosis) of one depth-j node from its pieces' block sums,
    as :func:`kurtosis_pair` of the whole node gives them."""
    n = plan.lengths[j]
    if not segments:
        return None, None
    whole = []

    def data():
        if not whole:
            whole.append(pm.join(pm.owned_parts(plan, j, stretches, 0, n)))
        return whole[0]

    seg = [pm.segment_sums(plan, j, segment, s, stretches, sums, buf)
           for s, segment in enumerate(segments)]
    return _pair_from_sums(n, seg, segments, short, data)


def _segments(m: int, left: int, right: int) -> tuple[list[tuple[int, int]], bool]:
    """(segments, short) of a node of m coefficients, ``left`` and ``right`` of them
    touched by the extension: the interior and the two edges, or the whole node when the
    interior is too short to judge (``short``), or none under 4 coefficients."""
    from scalesieve.core import band_choice

    short = m - right - left < max(4, band_choice.MIN_INTERIOR)
    return ([] if m < 4 else [(0, m)] if short else
            [(left, m - right), (0, left), (m - right, m)]), short


def _pair_from_sums(m: int, seg, segments: list, short: bool,
                    data) -> tuple[float | None, float | None]:
    """(kurtosis, interior kurtosis) of a node of m coefficients from its segments' raw
    sums ``seg`` (as :func:`_segments` lays them out); ``data()`` gives the node's values
    for a second pass."""
    if not segments:
        return None, None
    if short:
        return _kurtosis_of(m, seg[0], data, None), None
    (left, stop), inside = segments[0], seg[0]
    k = _kurtosis_of(m, inside + seg[1] + seg[2], data, None)
    if k is None:
        return None, None
    return k, _kurtosis_of(stop - left, inside, lambda: data()[left:stop], None)


def _row(j: int, path: str, rate: float, k, inner) -> dict:
    lo, hi = wp.range_hz(path, rate)
    return {"name": f"w{j}.{wp.freq_index(path)}", "low_hz": lo, "high_hz": hi,
            "kurtosis": k, "interior_kurtosis": inner, "path": path}


class _Choice:
    """The most impulsive band as rows come: the largest interior kurtosis, else (no band
    long enough for its interior) the largest kurtosis of all; ties to the first offered."""

    def __init__(self):
        self.best = self.best_ref = self.fallback = None

    def offer(self, row: dict, j: int, ref=None) -> None:
        inner, k = row["interior_kurtosis"], row["kurtosis"]
        if inner is not None and (self.best is None or inner > self.best["interior_kurtosis"]):
            self.best, self.best_ref = dict(row, level=j), ref
        elif self.best is None and k is not None and (
                self.fallback is None or k > self.fallback[0]["kurtosis"]):
            self.fallback = (dict(row, level=j), ref)

    def result(self) -> tuple[dict | None, object]:
        """(best row, its ref)."""
        if self.best is None and self.fallback is not None:
            return self.fallback
        return self.best, self.best_ref


def _dwt_halves(x: np.ndarray, w, mode: str, pool):
    """``pywt.dwt(x)`` as two overlapping halves in two threads (the same numbers).

    Output i of a stretch that starts at an even sample s is output i + s/2 of
    the whole, once its L taps lie inside the stretch; the halves overlap by
    L - 2 samples so that every output comes from a stretch holding all its taps.
    The periodic modes read the far end at each edge: they are done whole.
    """
    L = w.dec_len
    n = x.shape[0]
    h = (n // 2) & ~1
    if mode in ("periodic", "periodization") or L % 2 or h < 4 * L:
        return pywt.dwt(x, w, mode)
    s = h - L + 2
    first = pool.submit(pywt.dwt, x[:h + L], w, mode)
    second = pool.submit(pywt.dwt, x[s:], w, mode)
    (a1, d1), (a2, d2) = first.result(), second.result()
    k = (L - 2) // 2
    return (np.concatenate([a1[:h // 2], a2[k:]]), np.concatenate([d1[:h // 2], d2[k:]]))
