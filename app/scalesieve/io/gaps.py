"""Fill missing samples (NaN) in a table of channels, when the user opts in."""

from __future__ import annotations

import numpy as np

FILL_METHODS = ("linear",)


def check_fill_method(fill_gaps: str | None) -> str | None:
    """Return ``fill_gaps`` if it is ``None`` or a known method, else raise ``ValueError``."""
    if fill_gaps is None or fill_gaps in FILL_METHODS:
        return fill_gaps
    raise ValueError(
        f"unknown gap filling {fill_gaps!r}; choose one of: {', '.join(FILL_METHODS)}")


def fill_linear(values: np.ndarray) -> np.ndarray:
    """Replace NaN in each column, in place, by linear interpolation over the row index.

    Gaps before the first or after the last value take that value, as
    ``numpy.interp`` does. Every column must hold at least one value.

    Parameters
    ----------
    values : ndarray, shape (n, ch), float
        Modified in place.

    Returns
    -------
    ndarray of int, shape (ch,)
        How many cells were filled in each column.
    """
    n, ch = values.shape
    filled = np.zeros(ch, dtype=np.int64)
    index = np.arange(n, dtype=np.float64)
    for k in range(ch):
        col = values[:, k]
        gap = np.isnan(col)
        count = int(gap.sum())
        if count == 0:
            continue
        if count == n:
            raise ValueError(f"column {k} has no values to fill from")
        ok = ~gap
        col[gap] = np.interp(index[gap], index[ok], col[ok])
        filled[k] = count
    return filled
