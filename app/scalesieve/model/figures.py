"""Figures the model answers: band table, what a recipe did (metrics), transients.

The sums themselves are in ``core.band_figures`` and ``core.metrics`` (one
implementation every view reads); here they are put together for a channel.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Sequence

import numpy as np

from scalesieve.core import band_figures as bf
from scalesieve.core import edits as ed
from scalesieve.core import metrics as mt
from scalesieve.core import transforms as tf
from scalesieve.model.channel import Channel
from scalesieve.model.engine import Engine


def band_table(ch: Channel, spec: tf.TransformSpec, rate: float, dtype) -> list[dict]:
    """Per-band figures of the original recording (worked out once per decomposition).

    Returns copies: a caller may change its rows.
    """
    with ch.figures_lock:       # a second caller waits for the first one's table
        if ch.figures is None:
            ch.figures = bf.band_table(ch.x, ch.coeffs, spec, rate, dtype)
    return [dict(r) for r in ch.figures]


def signal_energy(ch: Channel) -> float:
    if ch.signal_energy is None:
        ch.signal_energy = bf.signal_energy(ch.x)
    return ch.signal_energy


def band_changes(ch: Channel, engine: Engine, key) -> tuple[int, int, float]:
    """(coefficients changed, coefficients zeroed, energy of c - e) of one band."""
    c = ch.band(key, engine.level)
    gain = engine.band_gain(ch, key)
    if gain == 1.0:
        # c - c: nothing changed (the same figures the general path gives)
        return 0, 0, 0.0
    if gain == 0.0:
        # c - 0 is c itself: every non-zero coefficient changed and zeroed
        if key not in ch.muted_figures:
            ch.muted_figures[key] = (int(np.count_nonzero(c)), bf.coefficient_moments(c)[0])
        count, energy = ch.muted_figures[key]
        return count, count, energy
    e = ed.state_values(c, gain) if gain is not None else engine.values_full(ch, key)
    d = c - e
    return (int(np.count_nonzero(d)), int(np.count_nonzero((e == 0) & (c != 0))),
            bf.coefficient_moments(d)[0])


def metrics(ch: Channel, engine: Engine, cleaned: np.ndarray) -> dict:
    """What the recipe did to one channel whose cleaned signal is ``cleaned``.

    Every sum runs over contiguous blocks (``core.band_figures``), so a
    channel's figures are the same bits whatever channels sit beside it.
    """
    level = engine.level
    per_band = []
    changed = zeroed = total = 0
    for key in tf.table_keys(engine.spec):
        ch_count, z_count, e_removed = band_changes(ch, engine, key)
        count = int(ch.band(key, level).shape[0])
        changed += ch_count
        zeroed += z_count
        total += count
        per_band.append({"name": tf.band_name(key, level), "energy_removed": e_removed,
                         "changed": ch_count, "zeroed": z_count, "count": count})
    e_orig = signal_energy(ch)
    n = ch.x.shape[0]
    e_rem, e_clean, peak = mt.removed_figures(ch.x, cleaned)
    return {
        "bands": per_band,
        "changed_fraction": changed / total if total else 0.0,
        "zeroed_fraction": zeroed / total if total else 0.0,
        "energy_removed_fraction": e_rem / e_orig if e_orig > 0 else 0.0,
        "rms_original": mt.rms_of_energy(e_orig, n),
        "rms_cleaned": mt.rms_of_energy(e_clean, n),
        "rms_removed": mt.rms_of_energy(e_rem, n),
        "snr_db": mt.snr_db_of_energies(e_orig, e_rem),
        "peak_change": peak,
    }


class PreparedEvents:
    """Levels prepared for transient detection, kept so a new ``k`` costs only detection."""

    def __init__(self, per_channel: int = 4) -> None:
        self._kept: dict = {}
        self.per_channel = per_channel

    def prepared(self, model, c: int, spec: tf.TransformSpec, lv: tuple) -> list:
        from scalesieve.core import events as ev

        key = (c, spec, lv)
        if key not in self._kept:
            # The model's own coefficients serve when they are the same
            # numbers the command line gets (same transform, float64).
            reuse = spec == model.spec and model.coefficients(c, lv[0]).dtype == np.float64
            bands = ({j: model.coefficients(c, j) for j in lv} if reuse
                     else ev.detail_bands(model.original(c), spec, lv))
            while len(self._kept) >= self.per_channel * max(1, model.recording.channels):
                self._kept.pop(next(iter(self._kept)))
            self._kept[key] = ev.prepare(bands, spec, model.recording.n)
        return self._kept[key]


def events(model, kept: PreparedEvents, levels, k: float, kind: str | None,
           channels: Sequence[int] | None):
    """Transients of the model's recording (``DecompositionModel.events``)."""
    from scalesieve.core import events as ev
    from scalesieve.errors import ScalesieveError

    rec = model.recording
    spec = replace(model.spec, kind=kind or ev.DEFAULT_KIND)
    try:
        lv = ev.check_levels(levels, model.level)
        ev.check_k(k)
        spec.validate()
    except ValueError as exc:
        raise ScalesieveError(str(exc), rec.source or None) from None
    chosen = range(rec.channels) if channels is None else list(channels)
    for c in chosen:
        if not 0 <= c < rec.channels:
            raise ScalesieveError(f"channel {c} is not in the recording (channels "
                                  f"0-{rec.channels - 1})")
    prepared = {c: kept.prepared(model, c, spec, lv) for c in chosen}
    return ev.detect_channels(prepared, model.original, rec.rate, k)
