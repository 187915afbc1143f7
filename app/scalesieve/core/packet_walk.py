"""The kurtosis table's packet tree walked in compiled time pieces.

The signal is cut every ``step(depth)`` samples into pieces (the cut does not
depend on the number of threads).  Each piece walks the whole packet tree to
depth J while its stretch of every node is in the processor's cache, which is
what makes the table cost about what one forward DWT costs: the tree itself
has J times a DWT's filtering, but no node is ever written to or read back
from main memory.  The compiled core (``_packet_walk.c``) makes PyWavelets'
own coefficients bit for bit, for every output whose filter taps lie inside
the signal; the two pieces at the ends, where the boundary extension enters,
are walked with ``pywt.dwt`` as in ``core.packet_moments``.

The raw moment sums (sum c, c^2, c^3, c^4) of every node are taken in
*units*: ``UNIT`` coefficients long on a grid from each node's index 0, also
cut where a segment (the interior and the two extension-touched edges,
``core.band_choice.dwt_edges``) starts or ends.  Every unit lies inside one
piece (the cuts are multiples of ``UNIT * 2^J``), its sums are taken in one
fixed order, and a segment's sums are its units' added one after the other
in index order: the same figures for any number of threads.  They equal
NumPy's sums of PyWavelets' node data to round-off (not bit for bit: the
order of the additions differs).

Used where the compiled core was built at install (a C compiler was there)
and the mode extends the edges; elsewhere (and for short signals) the table
keeps ``core.packet_moments``.
"""

from __future__ import annotations

import threading
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pywt

from scalesieve.core import packet_moments as pm

try:  # built at install when a C compiler is there (pyproject.toml: ext-modules)
    from scalesieve.core import _packet_walk as _compiled
except ImportError:  # pragma: no cover - an install without a compiler
    _compiled = None

#: coefficients per unit of the moment sums
UNIT = 1024
#: samples per piece, unless the depth asks for more (UNIT * 2^depth)
PIECE = 1 << 16
#: the compiled walk is used from this many pieces on (below, the pieces at the
#: ends would be most of the work)
MIN_PIECES = 4


def compiled() -> bool:
    """Whether the compiled core is installed."""
    return _compiled is not None


def step(depth: int) -> int:
    """Samples between cuts for a tree of this depth."""
    return max(PIECE, UNIT << depth)


def usable(n: int, wavelet: pywt.Wavelet, mode: str, depth: int) -> bool:
    """Whether the table of n samples is walked here."""
    return (_compiled is not None and pm.splittable(wavelet, mode)
            and wavelet.dec_len <= _compiled.MAX_TAPS and n // step(depth) >= MIN_PIECES)


def units_of(m: int, segments: list[tuple[int, int]]) -> np.ndarray:
    """Unit boundaries of a node of m coefficients: the UNIT grid and the segment ends."""
    marks = set(range(0, m, UNIT)) | {m}
    for a, b in segments:
        marks |= {a, b}
    return np.array(sorted(marks), dtype=np.int64)


def node_sums(x: np.ndarray, wavelet: pywt.Wavelet, mode: str, depth: int,
              segments: list[list[tuple[int, int]]], workers: int = 1,
              check=None) -> list[np.ndarray]:
    """Raw moment sums of every segment of every node of depths 1 .. depth.

    ``segments[j - 1]``: depth j's segments (index ranges, each node alike).
    Returns, for each depth j, an array of shape (2^j, len(segments), 4): the
    nodes in natural order (path letters a = 0, d = 1, the first the most
    significant), each segment's [sum c, c^2, c^3, c^4].  ``check()``, if
    given, is called before each piece is waited for and may raise to stop.
    """
    x = np.ascontiguousarray(x, dtype=np.float64)
    n = x.shape[0]
    s = step(depth)
    cuts = list(range(s, n - s + 1, s)) if n >= 2 * s else []
    plan = pm.Plan(n, wavelet, mode, depth, len(cuts) + 1, cuts=cuts)
    L = wavelet.dec_len
    lo = np.array(wavelet.dec_lo, dtype=np.float64)
    hi = np.array(wavelet.dec_hi, dtype=np.float64)
    units = [units_of(plan.lengths[j], segments[j - 1]) for j in range(1, depth + 1)]
    unit_off = np.zeros(depth + 2, dtype=np.int64)
    out_base = np.zeros(depth + 1, dtype=np.int64)
    total = 0
    for j in range(1, depth + 1):
        unit_off[j + 1] = unit_off[j] + units[j - 1].shape[0]
        out_base[j] = total
        total += (1 << j) * (units[j - 1].shape[0] - 1) * 4
    all_units = np.concatenate(units)
    out = np.zeros(max(total, 1))
    geom = np.zeros((plan.pieces, depth + 1, 4), dtype=np.int64)
    inside = []
    size = 0
    for p in range(plan.pieces):
        ok = True
        for j in range(depth + 1):
            geom[p, j, :2] = plan.need[j][p]
            if j:
                geom[p, j, 2:] = plan.owned[j][p]
                c0, c1 = plan.need[j][p]
                p0, p1 = plan.need[j - 1][p]
                ok = ok and 2 * c0 + 2 - L >= p0 and 2 * c1 <= p1
                size = max(size, (1 << j) * (c1 - c0))
        inside.append(ok)
    work_len = 2 * size + 2 * (_compiled.OUT_BLOCK + _compiled.MAX_TAPS)
    local = threading.local()

    def depth_out(j: int) -> np.ndarray:
        count = units[j - 1].shape[0] - 1
        return out[out_base[j]:out_base[j] + (1 << j) * count * 4]

    def piece(p: int) -> None:
        if inside[p]:
            work = getattr(local, "work", None)
            if work is None:
                work = local.work = np.empty(work_len)
            _compiled.walk(x, lo, hi, geom[p].reshape(-1), depth, all_units, unit_off,
                           out, out_base, work)
            return
        rows = [x[plan.need[0][p][0]:plan.need[0][p][1]]]
        for j in range(1, depth + 1):
            start = plan.need[j - 1][p][0]
            c0, c1 = plan.need[j][p]
            off = c0 - start // 2
            made = np.empty((2 * len(rows), c1 - c0))
            for r, data in enumerate(rows):
                a, d = pywt.dwt(data, wavelet, mode)
                made[2 * r] = a[off:off + (c1 - c0)]
                made[2 * r + 1] = d[off:off + (c1 - c0)]
            lo_j, hi_j = plan.owned[j][p]
            _compiled.sums(made, made.shape[0], c0, lo_j, hi_j, units[j - 1], depth_out(j))
            rows = list(made)

    pool = ThreadPoolExecutor(max_workers=workers) if workers > 1 else None
    try:
        if pool is None:
            for p in range(plan.pieces):
                if check is not None:
                    check()
                piece(p)
        else:
            for done in [pool.submit(piece, p) for p in range(plan.pieces)]:
                if check is not None:
                    check()
                done.result()
    finally:
        if pool is not None:
            pool.shutdown(cancel_futures=True)
    result = []
    for j in range(1, depth + 1):
        b = units[j - 1]
        per = depth_out(j).reshape(1 << j, b.shape[0] - 1, 4)
        sums = np.zeros((1 << j, len(segments[j - 1]), 4))
        for k, (sa, sb) in enumerate(segments[j - 1]):
            ua, ub = np.searchsorted(b, sa), np.searchsorted(b, sb)
            if ub > ua:   # one after the other, in index order
                sums[:, k] = np.cumsum(per[:, ua:ub], axis=1)[:, -1]
        result.append(sums)
    return result


def node_data(x: np.ndarray, wavelet: pywt.Wavelet, mode: str, path: str) -> np.ndarray:
    """``pywt.WaveletPacket(x, wavelet, mode)[path].data``, walking only the path
    (``x`` may be a node's data, ``path`` then read from there)."""
    c = np.asarray(x, dtype=np.float64)
    for letter in path:
        c = pywt.downcoef("a" if letter == "a" else "d", c, wavelet, mode, level=1)
    return c
