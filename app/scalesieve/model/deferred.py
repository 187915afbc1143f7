"""Deferred gain passes: what a channel's cleaned signal still lacks, and paying it.

On a long recording the window may defer a gain change: the pass that adds
``factor * component`` to the cleaned signal is recorded (``Owed``) and paid
piece by piece (``flush_step``).  ``cleaned_view`` and ``cleaned_at`` give
exact samples meanwhile; every other reader pays first (``pay``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from scalesieve.core.blocked import axpy
from scalesieve.model.channel import Channel


@dataclass
class Owed:
    """cleaned[start:] still lacks factor * component[start:] (a deferred gain pass)."""

    factor: float
    component: np.ndarray
    start: int = 0


def owe(ch: Channel, comp: np.ndarray, factor: float) -> None:
    """Record a gain pass instead of making it (passes over one component add up)."""
    for owed in ch.owed:
        if owed.component is comp and owed.start == 0:
            owed.factor += factor
            return
    ch.owed.append(Owed(float(factor), comp))


def pay(ch: Channel) -> None:
    """Apply everything a channel's cleaned signal is owed."""
    for owed in ch.owed:
        axpy(owed.factor, owed.component[owed.start:], ch.cleaned[owed.start:])
    ch.owed = []


def first_owed(ch: Channel) -> int | None:
    """First sample whose stored value still lacks a deferred pass."""
    return min(o.start for o in ch.owed) if ch.owed else None


def flush_step(channels: list[Channel], n: int, samples: int) -> tuple[int, int, int] | None:
    """Apply deferred passes to the next ``samples`` samples of the first channel owed.

    Returns ``(channel, start, stop)``, or None when nothing is owed.
    """
    for k, ch in enumerate(channels):
        if not ch.owed:
            continue
        a = min(o.start for o in ch.owed)
        b = min(n, a + int(samples))
        for o in ch.owed:
            if o.start == a:
                axpy(o.factor, o.component[a:b], ch.cleaned[a:b])
                o.start = b
        ch.owed = [o for o in ch.owed if o.start < n]
        return k, a, b
    return None


def cleaned_view(ch: Channel, start: int, stop: int) -> np.ndarray:
    """Exact cleaned samples start .. stop without paying (a view when nothing is owed there)."""
    owed = [o for o in ch.owed if o.start < stop]
    y = ch.cleaned[start:stop]
    if not owed:
        return y
    y = y.copy()
    for o in owed:
        a = max(start, o.start)
        y[a - start:] += o.factor * o.component[a:stop]
    return y


def cleaned_at(ch: Channel, index: np.ndarray) -> np.ndarray:
    """Exact cleaned samples at ``index`` (sorted or not) without paying."""
    index = np.asarray(index, dtype=np.int64)
    y = ch.cleaned[index]
    for o in ch.owed:
        if o.start == 0:             # owed everywhere (the usual case): no mask
            y += o.factor * o.component[index]
        else:
            later = index >= o.start
            y[later] += o.factor * o.component[index[later]]
    return y
