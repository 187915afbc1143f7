"""Band statistics and before/after metrics (pure functions)."""

from __future__ import annotations

import math

import numpy as np


def energy(a: np.ndarray) -> float:
    a = np.asarray(a, dtype=np.float64)
    return float(np.dot(a, a))


def pearson_kurtosis(a: np.ndarray) -> float | None:
    """E[(x - mean)^4] / var^2 (3 for Gaussian noise); None for a constant band."""
    a = np.asarray(a, dtype=np.float64)
    if a.size < 2:
        return None
    d = a - a.mean()
    m2 = float(np.mean(d * d))
    if m2 <= 0.0 or not math.isfinite(m2):
        return None
    d2 = d * d
    return float(np.mean(d2 * d2) / (m2 * m2))


def rms(a: np.ndarray) -> float:
    a = np.asarray(a, dtype=np.float64)
    return float(math.sqrt(np.dot(a, a) / a.size)) if a.size else 0.0


def peak(a: np.ndarray) -> float:
    a = np.asarray(a)
    return float(np.max(np.abs(a))) if a.size else 0.0


def snr_db(original: np.ndarray, removed: np.ndarray) -> float | None:
    """10 log10(energy of the original / energy of what was removed); None when nothing was."""
    return snr_db_of_energies(energy(original), energy(removed))


def snr_db_of_energies(eo: float, er: float) -> float | None:
    """``snr_db`` from the two energies, when they are known already."""
    if er == 0.0:
        return None
    if eo == 0.0:
        return float("-inf")
    return 10.0 * math.log10(eo / er)


#: samples per block for figures over whole signals: cache-sized, no full temporaries
BLOCK = 1 << 18


def energy_blocked(x: np.ndarray, block: int = BLOCK) -> float:
    """Sum of squares in float64, block by block (no full-length temporary)."""
    total = 0.0
    for i in range(0, x.shape[0], block):
        b = np.ascontiguousarray(x[i:i + block], dtype=np.float64)
        total += float(np.dot(b, b))
    return total


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


def rms_of_energy(e: float, n: int) -> float:
    return float(math.sqrt(e / n)) if n else 0.0
