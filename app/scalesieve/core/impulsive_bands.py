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


def kurtosis(c: np.ndarray, work: np.ndarray | None = None) -> float | None:
    """Pearson kurtosis of one band's coefficients (None for a band that carries nothing).

    ``work``, a float64 array at least as long as ``c``, is written over: with it
    no temporary the size of the band is made (fresh memory costs more here
    than the arithmetic).
    """
    c = np.asarray(c, dtype=np.float64)
    n = c.shape[0]
    if n < 4:
        return None
    d = np.subtract(c, c.mean(), out=None if work is None else work[:n])
    m2 = float(np.einsum("i,i->", d, d)) / n
    if not m2 > 0:
        return None
    np.multiply(d, d, out=d)
    m4 = float(np.einsum("i,i->", d, d)) / n
    return m4 / (m2 * m2)


def table(x: np.ndarray, rate: float, wavelet: str = "db4", mode: str = "symmetric",
          depth: int = DEFAULT_DEPTH) -> dict:
    """Kurtosis of every packet band of depths 1 .. ``depth``, and the largest.

    Returns ``{"levels": [{"level": j, "bands": [{"name", "low_hz", "high_hz",
    "kurtosis", "path"}, ...]}], "best": {...}}`` with bands in frequency
    order; ``best`` adds ``"level"``.  Ties go to the shallower (wider) band.
    """
    x = np.asarray(x, dtype=np.float64)
    top = pywt.dwt_max_level(x.shape[0], pywt.Wavelet(wavelet).dec_len)
    if depth < 1:
        raise ValueError(f"depth {depth} must be at least 1")
    if depth > top:
        raise ValueError(f"depth {depth} is deeper than {x.shape[0]} samples allow for "
                         f"{wavelet} (at most {top})")
    w = pywt.Wavelet(wavelet)
    levels = []
    best = None
    nodes = [("", x)]
    pool = ThreadPoolExecutor(max_workers=2) if x.shape[0] >= THREADS_FROM else None

    local = threading.local()

    def split(item):
        path, data = item
        a, d = pywt.dwt(data, w, mode)
        work = getattr(local, "work", None)
        if work is None or work.shape[0] < a.shape[0]:
            work = local.work = np.empty(a.shape[0])     # one per thread, reused
        return [(path + "a", a, kurtosis(a, work)), (path + "d", d, kurtosis(d, work))]

    try:
        for j in range(1, depth + 1):
            parts = list(pool.map(split, nodes)) if pool else [split(n) for n in nodes]
            made = [p for pair in parts for p in pair]
            del parts
            rows = []
            for path, _, k in sorted(made, key=lambda m: wp.freq_index(m[0])):
                lo, hi = wp.range_hz(path, rate)
                rows.append({"name": f"w{j}.{wp.freq_index(path)}", "low_hz": lo,
                             "high_hz": hi, "kurtosis": k, "path": path})
                if k is not None and (best is None or k > best["kurtosis"]):
                    best = dict(rows[-1], level=j)
            levels.append({"level": j, "bands": rows})
            nodes = [(p, c) for p, c, _ in made] if j < depth else []
            del made
    finally:
        if pool:
            pool.shutdown()
    return {"levels": levels, "best": best}
