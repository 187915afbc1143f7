"""Passes over long arrays in cache-sized blocks (no full-length temporaries)."""

from __future__ import annotations

import numpy as np


def blocks(count: int, size: int):
    """Index ranges ``(b0, b1)`` of ``size`` items covering ``0 .. count``."""
    return ((b, min(b + size, count)) for b in range(0, count, size))


def axpy(a: float, x: np.ndarray, y: np.ndarray, block: int = 1 << 17) -> None:
    """y += a * x in cache-sized blocks: one pass over memory, no full temporary.

    (SciPy's BLAS axpy is a little quicker on long signals, but importing it
    costs a third of a second and its libraries some 20 MB of resident memory.)
    """
    n = y.shape[0]
    tmp = np.empty(min(block, n), dtype=y.dtype)
    for i in range(0, n, block):
        j = min(i + block, n)
        t = tmp[: j - i]
        np.multiply(x[i:j], a, out=t)
        y[i:j] += t
