"""How an edit reads in the window: band names, gains in dB, rules by their published names.

One vocabulary for every pane (the Recipe list, row headers, lanes, tooltips);
the recipe file and the command line keep their own keys (docs/reference.md).
"""

from __future__ import annotations

from scalesieve.views.band_labels import format_seconds, gain_to_db

#: a rule's name on screen (recipe key -> published name)
RULE_NAMES = {"universal": "VisuShrink", "sure": "SureShrink", "bayes": "BayesShrink",
              "minimax": "minimax", "manual": "manual λ"}
NOISE_WORDS = {"finest": "σ from the finest band", "level": "σ per band"}


def db_text(gain: float) -> str:
    """``−6 dB``, ``+3.5 dB``, ``0 dB``; a gain of 0 is ``−∞ dB`` (mute)."""
    if gain <= 0:
        return "−∞ dB"
    db = gain_to_db(gain)
    if abs(db) < 0.05:
        return "0 dB"
    return f"{db:+.1f} dB".replace("-", "−")


def bands_text(edit, model) -> str:
    """The bands an edit acts on, by name (``d1, d2``; ``every detail band``)."""
    if edit.bands is not None:      # named as the model names them
        return ", ".join(edit.bands)
    if edit.levels == "details":
        return "every detail band"
    if edit.levels == "all":
        return "every band"
    if model is None:
        levels = [str(v) for v in edit.levels]
        return ("level " if len(levels) == 1 else "levels ") + ", ".join(levels)
    try:
        keys = edit.band_keys(model.level)
    except ValueError:
        return ",".join(str(v) for v in edit.levels)
    return ", ".join(model.band_name(k) for k in keys)


def edit_text(edit, model=None) -> str:
    """One readable line for an edit, in the window's words."""
    where = bands_text(edit, model)
    if edit.op == "gain":
        if edit.gain <= 0:
            return f"mute {where} ({db_text(edit.gain)})"
        return f"gain {db_text(edit.gain)} on {where}"
    if edit.op == "threshold":
        rule = (f"manual λ {edit.value:g}" if edit.rule == "manual"
                else RULE_NAMES.get(edit.rule, edit.rule))
        sc = f" ×{edit.scale:g}" if edit.scale != 1.0 else ""
        noise = "" if edit.rule == "manual" else f", {NOISE_WORDS.get(edit.noise, edit.noise)}"
        return f"threshold {rule}{sc} {edit.shape}{noise} on {where}"
    return (f"region {format_seconds(edit.start_s)}–{format_seconds(edit.stop_s)} s "
            f"{db_text(edit.gain)} on {where}")
