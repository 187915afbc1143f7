"""The edits a band's own controls make: its gain edit and its threshold edit.

Every control of a row header (or of a selection of rows) makes or changes
one entry of the Recipe whose ``levels`` are exactly those bands; edits
spanning other bands are changed in the Recipe pane.
"""

from __future__ import annotations

from dataclasses import replace

from scalesieve.recipe import Edit

#: quick thresholds over all detail bands: label -> (rule, shape)
ALL_DETAILS = (("VisuShrink (universal), soft", "universal", "soft"),
               ("BayesShrink, soft", "bayes", "soft"),
               ("SureShrink, soft", "sure", "soft"),
               ("minimax (Donoho–Johnstone), soft", "minimax", "soft"),
               ("VisuShrink (universal), hard", "universal", "hard"))


def own_edit(edits, op: str, key, channels, whole: bool = False):
    """Index and edit of the band's own edit of ``op`` (levels exactly that band).

    With ``whole``, ``key`` is a tuple of bands and the edit's levels must be it.
    """
    want = tuple(key) if whole else (key,)
    for i, e in enumerate(edits):
        if e.op == op and isinstance(e.levels, tuple) and e.levels == want \
                and e.channels == channels:
            return i, e
    return -1, None


def edits_on_band(edits, key, channel: int, spec) -> list[int]:
    """Indices of the enabled edits that touch a band of a channel (``spec``: the resolved
    transform, or a depth for the DWT/SWT)."""
    out = []
    for i, e in enumerate(edits):
        if not e.applies_to(channel):
            continue
        try:
            if key in e.band_keys(spec):
                out.append(i)
        except ValueError:
            continue
    return out


def set_band_gain(adapter, key, gain: float, scope) -> bool:
    """Make, change or drop the band's own gain edit."""
    edits = adapter.edits
    i, e = own_edit(edits, "gain", key, scope)
    if e is None:
        return adapter.add_edit(Edit("gain", levels=(key,), gain=gain, channels=scope)) \
            if gain != 1.0 else True
    if gain == 1.0 and e.enabled:
        return adapter.remove_edit(i)
    if e.gain == gain and e.enabled:
        return True
    return adapter.replace_edit(i, replace(e, gain=gain, enabled=True))


def set_band_threshold(adapter, keys, values: dict, scope) -> bool:
    """Make, change or drop the threshold edit on exactly ``keys`` (a band or a tuple)."""
    keys = tuple(keys) if isinstance(keys, (tuple, list)) else (keys,)
    edits = adapter.edits
    i, e = own_edit(edits, "threshold", keys, scope, whole=True)
    if values["rule"] == "off":
        return adapter.remove_edit(i) if e is not None else True
    kw = dict(rule=values["rule"], shape=values["shape"], noise=values["noise"],
              scale=values["scale"],
              value=values["value"] if values["rule"] == "manual" else None)
    if e is None:
        return adapter.add_edit(Edit("threshold", levels=keys, channels=scope, **kw))
    return adapter.replace_edit(i, replace(e, enabled=True, **kw))
