"""One channel's state: coefficients, edit chains, the cleaned signal and named caches."""

from __future__ import annotations

import threading
from dataclasses import replace

import numpy as np

from scalesieve.core import transforms as tf
from scalesieve.core.recording import Recording
from scalesieve.errors import ScalesieveError


class Channel:
    """Per-channel coefficients, chains and the cleaned signal.

    Every cache has its own attribute, emptied only by a new decomposition
    (a new Channel).
    """

    def __init__(self, x: np.ndarray, spec: tf.TransformSpec, dtype, progress=None):
        self.x = x                       # the recording's column: a view, never written
        self.coeffs = tf.forward(x, spec, dtype=dtype, progress=progress)
        self.lengths = [c.shape[0] for c in self.coeffs]
        self.chains: dict = {}           # key -> tuple of edits now applied to the band
        # With no edit the cleaned signal is the recording itself; it gets its
        # own array at the first edit (engine.own_cleaned): a load touches a
        # third less memory.
        self.cleaned = x
        self.incremental = False         # cleaned was updated by parts since the last full pass
        self.owed: list = []             # deferred gain passes (deferred.Owed)
        # caches
        self.components: dict = {}       # ((key, shape), ...) -> time component (LRU)
        self.values: dict = {}           # key -> edited values, kept once someone asked
        self.thresholds: dict = {}       # key -> ThresholdMemo (chain up to each edit -> lambda)
        self.contexts: dict = {}         # key -> BandContext
        self.positions: dict = {}        # key -> sample position of each coefficient
        self.sigma: dict = {}            # key or "finest" -> MAD noise of the original
        self.figures: list | None = None     # band table of the original, once asked
        # the window asks for it from more than one thread: it is made once
        self.figures_lock = threading.Lock()
        self.signal_energy: float | None = None  # energy of the original, once asked
        self.muted_figures: dict = {}    # key -> (non-zero count, coefficient energy)

    def band(self, key, level):
        return self.coeffs[tf.band_index(key, level)]


def resolve(recording: Recording, spec: tf.TransformSpec) -> tf.TransformSpec:
    """``spec`` with every default worked out for ``recording`` (level, best basis)."""
    try:
        spec = spec.resolved(recording.n)
        if spec.kind == "packet" and spec.basis == "best":
            # one tiling for every channel: the costs of the channels add up
            from scalesieve.core import packets as wp

            cols = [recording.samples[:, k] for k in range(recording.channels)]
            spec = replace(spec, basis=wp.best_basis(cols, spec.wavelet, spec.mode,
                                                     spec.level, spec.cost))
        return spec
    except ValueError as exc:
        raise ScalesieveError(str(exc), recording.source or None) from None


def decompose(recording: Recording, spec: tf.TransformSpec, dtype, progress=None,
              lo: float = 0.0, hi: float = 1.0) -> list[Channel]:
    """Every channel of ``recording`` decomposed; ``progress(fraction, text)`` in lo .. hi."""
    total = recording.channels
    chans = []
    for k in range(total):
        a = lo + (hi - lo) * k / total
        b = lo + (hi - lo) * (k + 1) / total
        text = f"decomposing channel {k + 1} of {total}"
        part = None
        if progress:
            progress(a, text)
            part = (lambda f, a=a, b=b, text=text: progress(a + (b - a) * f, text))
        chans.append(Channel(recording.samples[:, k], spec, dtype, part))
    return chans
