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

from scalesieve.core import packets as wp

#: the depth the table goes to unless told
DEFAULT_DEPTH = 6
#: from this many samples the nodes of one depth are shared between two threads
THREADS_FROM = 1 << 20
#: raw moments serve while mean^2 is at most this share of the mean square:
#: cancellation then costs under 1e-14 relative (rel. error ~ eps (mean/sd)^4)
RAW_MEAN_SHARE = 1e-3
#: samples per block of the moment sums (cache-sized)
MOMENT_BLOCK = 1 << 15


def _raw_sums(c: np.ndarray, buf: np.ndarray) -> np.ndarray:
    """[sum c, sum c^2, sum c^3, sum c^4], block by block (``buf`` is written over).

    ``c`` is read from memory once; each block's squares stay in cache.
    """
    s1 = s2 = s3 = s4 = 0.0
    for i in range(0, c.shape[0], MOMENT_BLOCK):
        b = c[i:i + MOMENT_BLOCK]
        sq = np.multiply(b, b, out=buf[:b.shape[0]])
        s1 += float(b.sum())
        s2 += float(sq.sum())
        s3 += float(np.einsum("i,i->", sq, b))
        s4 += float(np.einsum("i,i->", sq, sq))
    return np.array([s1, s2, s3, s4])


def _from_sums(c: np.ndarray, sums: np.ndarray, work: np.ndarray | None) -> float | None:
    """Pearson kurtosis of ``c`` given its raw sums (:func:`_raw_sums`)."""
    n = c.shape[0]
    mean, s2, s3, s4 = sums[0] / n, sums[1] / n, sums[2] / n, sums[3] / n
    m2 = s2 - mean * mean
    if m2 > 0 and mean * mean <= RAW_MEAN_SHARE * s2:
        # the mean is small beside the spread (detail nodes): the central moments
        # from the raw ones lose nothing to cancellation
        m4 = s4 - 4 * mean * s3 + 6 * mean * mean * s2 - 3 * mean ** 4
        return m4 / (m2 * m2) if m4 > 0 else None
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
          depth: int = DEFAULT_DEPTH, keep_best: bool = False, check=None) -> dict:
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

    edges = band_choice.dwt_edges(x.shape[0], w.dec_len, depth)
    levels = []
    best = None
    best_data = None
    fallback = None   # no band long enough for its interior: the largest kurtosis of all
    nodes = [("", x)]
    pool = ThreadPoolExecutor(max_workers=2) if x.shape[0] >= THREADS_FROM else None

    local = threading.local()

    def kurt(c, j):
        # (all, interior) of one node of depth j, from one read of its coefficients
        work = getattr(local, "work", None)
        if work is None:
            work = local.work = np.empty(MOMENT_BLOCK)   # one per thread, reused
        return kurtosis_pair(c, *edges[j - 1], band_choice.MIN_INTERIOR, work)

    def split(item):
        path, data = item
        a, d = pywt.dwt(data, w, mode)
        j = len(path) + 1
        return [(path + "a", a, kurt(a, j)), (path + "d", d, kurt(d, j))]

    def split_root(item):
        # one node alone: its dwt in two halves, then the two moments, each in two threads
        path, data = item
        a, d = _dwt_halves(data, w, mode, pool)
        ka, kd = pool.map(kurt, (a, d), (len(path) + 1,) * 2)
        return [(path + "a", a, ka), (path + "d", d, kd)]

    try:
        for j in range(1, depth + 1):
            if check is not None:
                check()
            if pool and len(nodes) == 1:
                parts = [split_root(nodes[0])]
            else:
                parts = list(pool.map(split, nodes)) if pool else [split(n) for n in nodes]
            made = [p for pair in parts for p in pair]
            del parts
            rows = []
            for path, data, (k, inner) in sorted(made, key=lambda m: wp.freq_index(m[0])):
                lo, hi = wp.range_hz(path, rate)
                rows.append({"name": f"w{j}.{wp.freq_index(path)}", "low_hz": lo,
                             "high_hz": hi, "kurtosis": k, "interior_kurtosis": inner,
                             "path": path})
                if inner is not None and (best is None or inner > best["interior_kurtosis"]):
                    best = dict(rows[-1], level=j)
                    best_data = data if keep_best else None
                elif best is None and k is not None and (
                        fallback is None or k > fallback[0]["kurtosis"]):
                    fallback = (dict(rows[-1], level=j), data if keep_best else None)
            levels.append({"level": j, "bands": rows})
            nodes = [(p, c) for p, c, _ in made] if j < depth else []
            del made
    finally:
        if pool:
            pool.shutdown()
    if best is None and fallback is not None:
        best, best_data = fallback
    out = {"levels": levels, "best": best}
    if keep_best:
        out["best_coefficients"] = best_data
    return out


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
