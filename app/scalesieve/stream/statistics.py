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


def plain_dot(a: np.ndarray, b: np.ndarray) -> float:
    """Sum of a * b without BLAS: a blocked pass calls this often, and BLAS's thread pool
    waking for every block costs more than the sum (measured: 5x slower on two cores)."""
    return float(np.einsum("i,i->", a, b))


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
        self.total += float(plain_dot(v, v))

    def bayes_threshold(self, sigma: float) -> float:
        """BayesShrink ``sigma^2 / sqrt(max(mean(d^2) - sigma^2, eps))``, from the band's sums.

        Chang, Yu & Vetterli 2000; the formula of ``thresholds.bayes_threshold``.
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


class Moments:
    """Count, mean and central moments 2..4 of a band, merged block by block.

    Blocks are combined with the pairwise update of Chan, Golub & LeVeque (1979)
    extended to the third and fourth moments (Pebay 2008, Sandia report
    SAND2008-6212, eqs. 1.5-1.6): stable where raw power sums would cancel.
    """

    def __init__(self):
        self.n = 0
        self.mean = self.m2 = self.m3 = self.m4 = 0.0
        self.square_sum = 0.0

    def add(self, values: np.ndarray) -> None:
        b = np.asarray(values, dtype=np.float64)
        nb = b.shape[0]
        if nb == 0:
            return
        self.square_sum += float(plain_dot(b, b))
        mb = float(b.mean())
        d = b - mb
        d2 = d * d
        m2b, m3b, m4b = float(d2.sum()), float(plain_dot(d2, d)), float(plain_dot(d2, d2))
        na, n = self.n, self.n + nb
        delta = mb - self.mean
        m4 = (self.m4 + m4b + delta ** 4 * na * nb * (na * na - na * nb + nb * nb) / n ** 3
              + 6 * delta ** 2 * (na * na * m2b + nb * nb * self.m2) / n ** 2
              + 4 * delta * (na * m3b - nb * self.m3) / n)
        m3 = (self.m3 + m3b + delta ** 3 * na * nb * (na - nb) / n ** 2
              + 3 * delta * (na * m2b - nb * self.m2) / n)
        self.m2 = self.m2 + m2b + delta * delta * na * nb / n
        self.m3, self.m4 = m3, m4
        self.mean += delta * nb / n
        self.n = n

    def pearson_kurtosis(self) -> float | None:
        """``E[(x - mean)^4] / var^2``, as ``core.metrics.pearson_kurtosis`` defines it."""
        if self.n < 2:
            return None
        m2 = self.m2 / self.n
        if m2 <= 0.0 or not math.isfinite(m2):
            return None
        return float((self.m4 / self.n) / (m2 * m2))
