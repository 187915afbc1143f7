"""Where the Envelope spectrum's line labels go, so that no two overlap (no Qt).

A label sits to the right of its line (its left edge on the line) in one of a
few rows near the top of the plot.  Labels are placed one by one, the first
harmonics of each family first, each in the first row where it overlaps no
label placed already; a label that fits nowhere is left out (its line stays,
and the readout below the plot lists every line).
"""

from __future__ import annotations

from typing import Callable, Sequence

#: a rough width of one label character and the height of one row, in pixels
CHAR_PX = 7.5
ROW_PX = 16.0
#: room kept between two labels of one row
GAP_PX = 10.0


def label_rows(height_px: float, top: float = 0.92, rows: int = 4,
               row_px: float = ROW_PX) -> list[float]:
    """Row heights as fractions of the plot height (1 = top), ``row_px`` apart.

    As many of ``rows`` as fit in the upper half of a plot ``height_px`` tall.
    """
    step = float(row_px) / max(float(height_px), 1.0)
    out = [top - i * step for i in range(rows)]
    return [h for h in out if h >= 0.5] or [top]


def place_labels(lines: Sequence[tuple[float, str, int]], x0: float, x1: float,
                 width_px: float, height_px: float,
                 text_px: Callable[[str], float] | None = None,
                 row_px: float = ROW_PX) -> list[float | None]:
    """A row height (fraction of the plot) for each ``(hz, text, priority)``, or None.

    ``x0 .. x1`` is the frequency span the plot shows across ``width_px``
    pixels; lower ``priority`` is placed first (ties: lower frequency first).
    ``text_px`` gives a label's drawn width in pixels (the window measures it with its
    font); without it ``CHAR_PX`` per character.  ``row_px`` is a label's drawn height.
    """
    rows = label_rows(height_px, row_px=row_px)
    span = max(float(x1) - float(x0), 1e-12)
    per_px = max(float(width_px), 1.0) / span
    taken: list[list[tuple[float, float]]] = [[] for _ in rows]
    out: list[float | None] = [None] * len(lines)
    order = sorted(range(len(lines)), key=lambda i: (lines[i][2], lines[i][0]))
    for i in order:
        hz, text, _ = lines[i]
        left = (float(hz) - x0) * per_px
        wide = CHAR_PX * len(text) if text_px is None else float(text_px(text))
        right = left + wide + GAP_PX
        if left < 0 or right > width_px + GAP_PX:
            continue                       # off the plot, or it would run past its edge
        for r, boxes in enumerate(taken):
            if all(right <= a or left >= b for a, b in boxes):
                boxes.append((left, right))
                out[i] = rows[r]
                break
    return out
