"""How bands, levels and frequencies are written on screen."""

from __future__ import annotations

import math


def _num(v: float) -> str:
    """Three significant digits at most, no trailing zeros."""
    if v == 0:
        return "0"
    digits = max(0, 2 - int(math.floor(math.log10(abs(v)))))
    text = f"{v:.{digits}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return text


def hz_range(lo: float, hi: float) -> str:
    """``6.4–12.8 kHz``, ``25–50 Hz``, ``0–0.977 Hz``: one unit for both ends."""
    if hi >= 1000:
        return f"{_num(lo / 1000)}–{_num(hi / 1000)} kHz"
    return f"{_num(lo)}–{_num(hi)} Hz"


def band_label(name: str, lo: float, hi: float) -> str:
    return f"{name}  {hz_range(lo, hi)}"


def levels_text(levels) -> str:
    """Levels as the recipe writes them, for lists and messages."""
    if isinstance(levels, str):
        return levels
    return ",".join(str(v) for v in levels)


def level_sort_key(key):
    """Detail levels first (finest first), then the approximation; packet bands by frequency."""
    if hasattr(key, "position"):
        return (0, key.position)
    return (1, 0) if key == "a" else (0, int(key))


def gain_to_db(gain: float) -> float:
    return -math.inf if gain <= 0 else 20.0 * math.log10(gain)


def db_to_gain(db: float) -> float:
    return 10.0 ** (db / 20.0)


def format_seconds(t: float) -> str:
    """A time with as many decimals as a reader needs (up to microseconds)."""
    return f"{t:.6f}".rstrip("0").rstrip(".") if t != 0 else "0"
