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

from scalesieve.core import metrics as mt
from scalesieve.gui.decimate import BlockEnvelope

#: a change reaching more than this share of the recording rebuilds a band's envelope
FULL_REBUILD_SHARE = 0.5


def band_figures(arrays: dict) -> dict:
    """Per band: coefficient count, energy, energy share and Pearson kurtosis."""
    stats = {key: {"count": int(c.shape[0]), "energy": mt.energy(c),
                   "kurtosis": mt.pearson_kurtosis(c)} for key, c in arrays.items()}
    total = sum(st["energy"] for st in stats.values())
    for st in stats.values():
        st["energy_fraction"] = st["energy"] / total if total > 0 else 0.0
    return stats


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
                 progress: Callable[[float, str], None] | None = None):
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
        self.unit: dict = {}
        self.edited: dict = {}
        self.gains: dict = {}
        keys = list(model.band_keys)
        # Energy share and kurtosis read only the coefficient arrays (which the
        # model never writes), so a second thread works them out while this one
        # asks the model for the band components; numpy lets both run at once.
        arrays = {key: model.coefficients(channel, key) for key in keys}
        with ThreadPoolExecutor(max_workers=1) as pool:
            figures = pool.submit(band_figures, arrays)
            # Coarse to fine: the model keeps the last component it made, and
            # the finest bands are the ones most often muted first.
            order = ["a"] + sorted((k for k in keys if k != "a"), reverse=True)
            try:
                for i, key in enumerate(order):
                    check()
                    if progress:
                        progress(i / len(order), f"drawing band {model.band_name(key)}")
                    comp = model.band_component(channel, key, edited=False)
                    self.unit[key] = BlockEnvelope.of(comp, self.block)
                    del comp
                    self._take_state(model, key, full=True)
            finally:
                self.stats = figures.result()
        if progress:
            progress(1.0, "ready")

    # ---------------------------------------------------------------- reading

    def band_envelope(self, key) -> BlockEnvelope:
        """Envelope of the band's component as edited."""
        env = self.edited.get(key)
        if env is not None:
            return env
        return self.unit[key].scaled(self.gains.get(key, 1.0))

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
        cleaned = model.cleaned(ch)
        if whole:
            self.cleaned = BlockEnvelope.of(cleaned, self.block)
            self.removed = BlockEnvelope.of_source(self._removed_fetch(model), self.n, self.block)
        else:
            self.cleaned.refresh(span[0], span[1], lambda a, b: cleaned[a:b])
            self.removed.refresh(span[0], span[1], self._removed_fetch(model))
        for key in change.bands:
            if key in self.unit:
                self._take_state(model, key, full=whole, span=span)

    def refresh_all(self, model) -> None:
        """Bring every edited envelope up to the model (after a recipe replaced as a whole)."""
        ch = self.channel
        self.cleaned = BlockEnvelope.of(model.cleaned(ch), self.block)
        self.removed = BlockEnvelope.of_source(self._removed_fetch(model), self.n, self.block)
        for key in self.unit:
            self._take_state(model, key, full=True)
