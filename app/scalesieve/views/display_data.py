"""What the panes draw for one channel, kept in step with the model's changes.

Block envelopes of the original, cleaned and removed signals and of every
band's time-domain component, plus the model's band figures (``band_table``).
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
from scalesieve.views.decimate import BlockEnvelope, block_maxabs, preview_pair, refresh_pair

#: a change reaching more than this share of the recording rebuilds a band's envelope
FULL_REBUILD_SHARE = 0.5


#: from this many samples the band figures come from the background thread
#: (band_envelopes.py) after the first paint: each band's synthesis takes a while
FIGURES_LATER_FROM = 1 << 22
#: coefficients read at a time when the block peaks are taken
FIGURE_BLOCK = 1 << 16


def coefficient_peaks(arrays: dict) -> dict:
    """Per band ``(block, largest |c| per block of block_size(len(c)) coefficients)``.

    What a zoomed-out Scale map draws; the band figures themselves (energy
    share, kurtosis, ...) are the model's ``band_table``, not worked out here.
    """
    out = {}
    for key, c in arrays.items():
        n = c.shape[0]
        per = block_size(max(n, 1))
        peaks = np.zeros(-(-n // per))
        chunk = max(FIGURE_BLOCK, per)          # both powers of two: whole blocks per chunk
        for b in range(0, n, chunk):
            part = block_maxabs(np.asarray(c[b:b + chunk], dtype=np.float64), per)
            peaks[b // per:b // per + part.shape[0]] = part
        out[key] = (per, peaks)
    return out


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
        # The block peaks read only the coefficient arrays (which the model
        # never writes), so a second thread takes them while this one asks the
        # model for its band figures and components; numpy lets both run at once.
        arrays = {key: model.coefficients(channel, key) for key in keys}
        with ThreadPoolExecutor(max_workers=1) as pool:
            peaks = pool.submit(coefficient_peaks, arrays)
            # Coarse to fine: the model keeps the last component it made, and
            # the finest bands are the ones most often muted first.
            order = (["a"] if "a" in keys else []) + sorted((k for k in keys if k != "a"),
                                                             reverse=True)
            try:
                #: band key -> the model's band_table row (the figures every view shows);
                #: empty until ``put_figures`` on a long recording
                self.stats: dict = {}
                if self.n < FIGURES_LATER_FROM:
                    self.put_figures(model.band_table(channel))
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
                #: band key -> (block, largest |coefficient| per block), as read
                self.coef_peaks = peaks.result()
        if progress:
            progress(1.0, "ready")

    def put_figures(self, rows: list[dict]) -> None:
        """Take the band table (``band_table`` rows, d1 ... dJ then aJ)."""
        self.stats = {key: row for key, row in zip(self.keys, rows)}

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
