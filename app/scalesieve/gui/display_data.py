"""What the panes draw for one channel, kept in step with the model's changes.

Block envelopes of the original, cleaned and removed signals and of every
band's time-domain component, plus each band's energy share and kurtosis.
They are built once per decomposition (in the worker thread, on a model no
other thread touches) and afterwards updated from the model's change
notices: a band gain rescales an envelope, a region refreshes only the
blocks its span reaches.  All numbers come from the model; nothing here
runs a transform.  No Qt.
"""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor
from typing import Callable

import numpy as np
from scalesieve.gui.decimate import BlockEnvelope, block_maxabs, preview_pair, refresh_pair

#: a change reaching more than this share of the recording rebuilds a band's envelope
FULL_REBUILD_SHARE = 0.5


#: coefficients per block when the band figures are summed
FIGURE_BLOCK = 1 << 16


def energy_and_kurtosis(c: np.ndarray) -> tuple[float, float | None, float, np.ndarray]:
    """Energy (sum of squares), Pearson kurtosis E[(x - mean)^4] / var^2 and peak |c| of a band.

    The formulas of ``core.metrics.energy`` and ``core.metrics.pearson_kurtosis``
    summed block by block: no band-sized temporaries (on a long recording
    their first touch costs more than the arithmetic).  The sums run in
    another order, so the figures may differ from those in the last bits.
    Also returned, from the same pass: the largest |c| per block of
    ``block_size(len(c))`` coefficients (a zoomed-out Scale map reads them).
    """
    n = c.shape[0]
    if n == 0:
        return 0.0, None, 0.0, np.zeros(0)
    per = block_size(n)
    chunk = max(FIGURE_BLOCK, per)          # both powers of two: whole blocks per chunk
    peaks = np.empty(-(-n // per))
    total = 0.0
    for b in range(0, n, chunk):
        blk = np.asarray(c[b:b + chunk], dtype=np.float64)
        total += float(blk.sum())
        part = block_maxabs(blk, per)
        peaks[b // per:b // per + part.shape[0]] = part
    peak = float(peaks.max())
    mean = total / n
    e = s2 = s4 = 0.0
    for b in range(0, n, FIGURE_BLOCK):
        blk = np.asarray(c[b:b + FIGURE_BLOCK], dtype=np.float64)
        e += float(np.dot(blk, blk))
        d = blk - mean
        d2 = d * d
        s2 += float(d2.sum())
        s4 += float(np.dot(d2, d2))
    if n < 2:
        return e, None, peak, peaks
    m2 = s2 / n
    if m2 <= 0.0 or not np.isfinite(m2):
        return e, None, peak, peaks
    return e, (s4 / n) / (m2 * m2), peak, peaks


def band_figures(arrays: dict) -> tuple[dict, dict]:
    """Per band: coefficient count, energy, energy share, Pearson kurtosis and peak |c|;
    and per band ``(block, largest |c| per block)``."""
    stats, block_peaks = {}, {}
    for key, c in arrays.items():
        e, k, peak, peaks = energy_and_kurtosis(c)
        stats[key] = {"count": int(c.shape[0]), "energy": e, "kurtosis": k, "peak": peak}
        block_peaks[key] = (block_size(c.shape[0]), peaks)
    total = sum(st["energy"] for st in stats.values())
    for st in stats.values():
        st["energy_fraction"] = st["energy"] / total if total > 0 else 0.0
    return stats, block_peaks


class ExactCleaned:
    """The model's cleaned signal of one channel, sliced exactly without paying deferred passes."""

    def __init__(self, model, channel: int):
        self.model, self.channel = model, channel
        self.dtype = model.dtype

    def __getitem__(self, sl: slice) -> np.ndarray:
        return self.model.cleaned_view(self.channel, sl.start, sl.stop)


class Superseded(Exception):
    """A newer request made this preparation pointless."""


def block_size(n: int) -> int:
    """Samples per envelope block: about 32 768 blocks, at least 8 samples each."""
    b = 8
    while n // b > 32768:
        b *= 2
    return b


class ChannelPictures:
    """Envelopes and band figures of one channel of a model.

    Parameters
    ----------
    model : DecompositionModel
        Only read, and only from the thread that owns it at the time.
    channel : int
    check : callable, optional
        Called between steps; raises :class:`Superseded` to stop early.
    progress : callable(fraction, text), optional
    """

    def __init__(self, model, channel: int, check: Callable[[], None] | None = None,
                 progress: Callable[[float, str], None] | None = None,
                 bands_later: bool = False):
        check = check or (lambda: None)
        self.channel = channel
        self.n = model.recording.n
        self.rate = model.recording.rate
        self.block = block_size(self.n)
        x = model.original(channel)
        self.original = BlockEnvelope.of(x, self.block)
        if any(e.applies_to(channel) for e in model.edits):
            self.cleaned = BlockEnvelope.of(model.cleaned(channel), self.block)
            self.removed = BlockEnvelope.of_source(self._removed_fetch(model), self.n,
                                                   self.block)
        else:
            # No edit reaches this channel: cleaned is the original, nothing is removed.
            self.cleaned = self.original.copy()
            self.removed = self.original.scaled(0.0)
        #: samples whose cleaned/removed envelopes are a preview (see ``update``), or None
        self.provisional: tuple[int, int] | None = None
        self.unit: dict = {}
        self.edited: dict = {}
        self.gains: dict = {}
        keys = list(model.band_keys)
        self.keys = keys
        # Energy share and kurtosis read only the coefficient arrays (which the
        # model never writes), so a second thread works them out while this one
        # asks the model for the band components; numpy lets both run at once.
        arrays = {key: model.coefficients(channel, key) for key in keys}
        with ThreadPoolExecutor(max_workers=1) as pool:
            figures = pool.submit(band_figures, arrays)
            # Coarse to fine: the model keeps the last component it made, and
            # the finest bands are the ones most often muted first.
            order = (["a"] if "a" in keys else []) + sorted((k for k in keys if k != "a"),
                                                             reverse=True)
            try:
                for i, key in enumerate(order):
                    check()
                    if progress:
                        progress(i / len(order), f"drawing band {model.band_name(key)}")
                    if bands_later:
                        # The unit envelope comes later (band_envelopes.py); only a
                        # band edited other than by a gain needs its own now.
                        self._take_state(model, key, full=True)
                        continue
                    comp = model.band_component(channel, key, edited=False)
                    self.unit[key] = BlockEnvelope.of(comp, self.block)
                    del comp
                    self._take_state(model, key, full=True)
            finally:
                #: and coef_peaks: band key -> (block, largest |coefficient| per block), as read
                self.stats, self.coef_peaks = figures.result()
        if progress:
            progress(1.0, "ready")

    def missing_bands(self) -> list:
        """Bands whose unit envelope is still to come, finest first."""
        return [key for key in self.keys if key not in self.unit]

    def put_unit(self, model, key, env: BlockEnvelope) -> None:
        """Take a band's unit envelope made elsewhere (``model`` as it is now)."""
        self.unit[key] = env
        if (model is not None and model.band_gain(self.channel, key) is None
                and self.edited.get(key) is None):
            # Edited other than by a gain while the envelope was being made.
            self._take_state(model, key, full=True)

    # ---------------------------------------------------------------- reading

    def band_envelope(self, key) -> BlockEnvelope | None:
        """Envelope of the band's component as edited (None: not made yet)."""
        env = self.edited.get(key)
        if env is not None:
            return env
        unit = self.unit.get(key)
        return None if unit is None else unit.scaled(self.gains.get(key, 1.0))

    def band_is_edited(self, key) -> bool:
        return self.edited.get(key) is not None or self.gains.get(key, 1.0) != 1.0

    # --------------------------------------------------------------- updating

    def _removed_fetch(self, model):
        ch = self.channel
        x = model.original(ch)
        y = model.cleaned(ch)
        return lambda a, b: x[a:b] - y[a:b]

    def _take_state(self, model, key, full: bool, span=None) -> None:
        gain = model.band_gain(self.channel, key)
        if gain is not None:
            self.gains[key] = float(gain)
            self.edited[key] = None
            return
        if self.edited.get(key) is None and key not in self.unit:
            # Edited other than by a gain before the unit envelope came: put_unit
            # makes the edited one when it does (an envelope made now would be
            # a full synthesis in the GUI thread).
            if not full:
                self.edited[key] = None
                return
        if full or span is None:
            comp = model.band_component(self.channel, key, edited=True)
            self.edited[key] = BlockEnvelope.of(comp, self.block)
            return
        # Outside the span the band is as it was; refresh the span only.
        env = self.edited.get(key)
        if env is None:
            env = self.unit[key].scaled(self.gains.get(key, 1.0))
        ch = self.channel
        env.refresh(span[0], span[1],
                    lambda a, b: model.band_component_span(ch, key, a, b, edited=True))
        self.edited[key] = env

    def update(self, model, change) -> None:
        """Follow a recipe change of the model (its ``Change`` notice)."""
        if self.channel not in change.channels:
            return
        span = change.span
        if span is None:
            return
        whole = (span[1] - span[0]) > FULL_REBUILD_SHARE * self.n
        ch = self.channel
        owed = model.deferred(ch)
        if owed is None:
            # Cleaned and removed (original - cleaned) in one pass over the span.
            refresh_pair(self.cleaned, self.removed, model.original(ch), model.cleaned(ch),
                         span[0], span[1])
            self._exact(span[0], span[1])
        else:
            # A deferred full pass (a long recording): exact where the model has
            # paid it, a preview from a sample of each block beyond; the
            # window's sweep (``refine``) makes those blocks exact.
            exact = ExactCleaned(model, ch)
            if span[0] < owed:
                refresh_pair(self.cleaned, self.removed, model.original(ch), exact,
                             span[0], min(span[1], owed))
                self._exact(span[0], min(span[1], owed))
            if span[1] > owed:
                a = max(span[0], owed)
                preview_pair(self.cleaned, self.removed, model.original(ch),
                             lambda idx: model.cleaned_at(ch, idx), a, span[1])
                p = self.provisional
                self.provisional = (a, span[1]) if p is None else (min(p[0], a),
                                                                   max(p[1], span[1]))
        for key in change.bands:
            if key in self.keys:
                self._take_state(model, key, full=whole, span=span)

    def refine(self, model, start: int, stop: int) -> None:
        """Exact cleaned and removed envelopes of samples start .. stop (after a sweep step)."""
        refresh_pair(self.cleaned, self.removed, model.original(self.channel),
                     ExactCleaned(model, self.channel), start, stop)
        self._exact(start, stop)

    def _exact(self, start: int, stop: int) -> None:
        """Samples start .. stop are drawn exactly now: the preview shrinks from its front."""
        p = self.provisional
        if p is not None and start <= p[0] < stop:
            self.provisional = None if stop >= p[1] else (stop, p[1])

    def refresh_all(self, model) -> None:
        """Bring every edited envelope up to the model (after a recipe replaced as a whole)."""
        ch = self.channel
        refresh_pair(self.cleaned, self.removed, model.original(ch), model.cleaned(ch))
        self.provisional = None
        for key in self.keys:
            if key in self.unit or model.band_gain(ch, key) is not None:
                self._take_state(model, key, full=True)
            else:
                self.edited[key] = None       # made when the unit envelope comes
