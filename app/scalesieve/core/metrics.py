"""Before/after metrics of a cleaned signal (pure functions).

A band's own figures (energy, share, RMS, peak, kurtosis) are in
``band_figures``: one implementation, which every view reads.
"""

from __future__ import annotations

import math

import numpy as np


def snr_db_of_energies(eo: float, er: float) -> float | None:
    """10 log10(energy of the original / energy of what was removed); None when nothing was."""
    if er == 0.0:
        return None
    if eo == 0.0:
        return float("-inf")
    return 10.0 * math.log10(eo / er)


#: samples per block for figures over whole signals: cache-sized, no full temporaries
BLOCK = 1 << 18


def removed_figures(x: np.ndarray, cleaned: np.ndarray,
                    block: int = BLOCK) -> tuple[float, float, float]:
    """(energy of x - cleaned, energy of cleaned, peak |x - cleaned|) in one blocked pass."""
    e_rem = e_clean = 0.0
    top = 0.0
    tmp = np.empty(min(block, x.shape[0]))
    cbuf = np.empty(min(block, x.shape[0]))
    for i in range(0, x.shape[0], block):
        j = min(i + block, x.shape[0])
        r = tmp[: j - i]
        np.subtract(x[i:j], cleaned[i:j], out=r)
        # copied into our own buffer: a strided column would sum in another order
        c = cbuf[: j - i]
        np.copyto(c, cleaned[i:j], casting="same_kind")
        e_rem += float(np.einsum("i,i->", r, r))
        e_clean += float(np.einsum("i,i->", c, c))
        if r.size:
            top = max(top, float(np.max(np.abs(r))))
    return e_rem, e_clean, top


def removed_energy(x: np.ndarray, cleaned: np.ndarray, block: int = BLOCK) -> float:
    """Energy of ``x - cleaned`` (sum of squares, float64) in one blocked pass.

    The first figure of ``removed_figures``, the same number, without the two
    others: what the ``clean`` command's summary line needs.
    """
    e_rem = 0.0
    tmp = np.empty(min(block, x.shape[0]))
    for i in range(0, x.shape[0], block):
        j = min(i + block, x.shape[0])
        r = tmp[: j - i]
        np.subtract(x[i:j], cleaned[i:j], out=r)
        e_rem += float(np.einsum("i,i->", r, r))
    return e_rem


def rms_of_energy(e: float, n: int) -> float:
    return float(math.sqrt(e / n)) if n else 0.0
