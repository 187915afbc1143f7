"""Whole-band figures a threshold needs, gathered from bands handed out block by block.

A median is found exactly in two passes (a selection by the values' bits):
the first counts the magnitudes in bins of their leading bits, which are in
the same order as the values; the second keeps only the values in the bins
where the middle ranks fall, and sorts those few.  The result is the number
``numpy.median`` gives over the whole band.
"""

from __future__ import annotations

import math

import numpy as np

from scalesieve.core import thresholds as th

#: leading bits of a float64 magnitude that name its bin (sign, exponent, 8 mantissa bits)
_SHIFT = 44
_BINS = 1 << (64 - _SHIFT)


def _bins(values: np.ndarray) -> np.ndarray:
    a = np.abs(np.asarray(values, dtype=np.float64))
    a = a[a != 0]
    return a, (a.view(np.uint64) >> np.uint64(_SHIFT)).astype(np.intp)


class MedianOfMagnitudes:
    """``median(|c|)`` over the non-zero coefficients of one band, in two passes."""

    def __init__(self):
        self.counts: np.ndarray | None = np.zeros(_BINS, dtype=np.int64)
        self.wanted: dict | None = None     # bin -> values kept in the second pass
        self.value: float | None = None

    @property
    def stage(self) -> str:
        return "count" if self.wanted is None else "keep" if self.value is None else "done"

    def add(self, values: np.ndarray) -> None:
        a, b = _bins(values)
        if self.wanted is None:
            self.counts += np.bincount(b, minlength=_BINS)
            return
        for bin_, parts in self.wanted.items():
            pick = a[b == bin_]
            if pick.size:
                parts.append(pick)

    def end_pass(self) -> None:
        if self.wanted is None:
            m = int(self.counts.sum())
            if m == 0:
                self.value = 0.0
                self.wanted = {}
                return
            self.m = m
            self.ranks = [m // 2] if m % 2 else [m // 2 - 1, m // 2]
            cum = np.cumsum(self.counts)
            self.rank_bins = [int(np.searchsorted(cum, r, side="right")) for r in self.ranks]
            self.below = {b: int(cum[b] - self.counts[b]) for b in self.rank_bins}
            self.wanted = {b: [] for b in self.rank_bins}
            self.counts = None
            return
        picked = []
        for r, b in zip(self.ranks, self.rank_bins):
            vals = np.sort(np.concatenate(self.wanted[b]))
            picked.append(vals[r - self.below[b]])
        self.value = float(np.mean(picked)) if len(picked) == 2 else float(picked[0])
        self.wanted = {}

    def sigma(self) -> float:
        """The MAD noise estimate ``median(|c|) / 0.6745`` (Donoho & Johnstone 1994)."""
        return self.value / th.MAD_TO_SIGMA


class SquareSum:
    """Count and sum of squares of a band's values (what BayesShrink reads)."""

    def __init__(self):
        self.count = 0
        self.total = 0.0

    def add(self, values: np.ndarray) -> None:
        v = np.asarray(values, dtype=np.float64)
        self.count += v.shape[0]
        self.total += float(np.dot(v, v))

    def bayes_threshold(self, sigma: float) -> float:
        """BayesShrink ``sigma^2 / sqrt(max(mean(d^2) - sigma^2, eps))`` (Chang, Yu & Vetterli 2000).

        The same formula as ``thresholds.bayes_threshold``, from the band's sums.
        """
        var = sigma * sigma
        if self.count == 0 or var == 0.0:
            return 0.0
        eps = float(np.finfo(np.float64).eps)
        return float(var / math.sqrt(max(self.total / self.count - var, eps)))


class BandValues:
    """Every value of a band, kept (SURE sorts the whole band: it cannot be summed)."""

    def __init__(self):
        self.parts: list[np.ndarray] = []

    def add(self, values: np.ndarray) -> None:
        self.parts.append(np.array(values, dtype=np.float64))

    def sure_threshold(self, sigma: float) -> float:
        """SureShrink (Donoho & Johnstone 1995) over the whole band."""
        v = np.concatenate(self.parts) if self.parts else np.zeros(0)
        self.parts = []
        return th.sureshrink_threshold(v, sigma)
