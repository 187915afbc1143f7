"""One channel's state: coefficients, edit chains, the cleaned signal and named caches."""

from __future__ import annotations

import numpy as np

from scalesieve.core import transforms as tf


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
        self.signal_energy: float | None = None  # energy of the original, once asked
        self.muted_figures: dict = {}    # key -> (non-zero count, coefficient energy)

    def band(self, key, level):
        return self.coeffs[tf.band_index(key, level)]
