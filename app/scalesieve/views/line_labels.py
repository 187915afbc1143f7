"""Where the Envelope spectrum's line labels go, so that no two overlap (no Qt).

A label sits to the right of its line (its left edge on the line) in one of a
few rows near the top of the plot.  Labels are placed one by one, the first
harmonics of each family first, each in the first row where it overlaps no
label placed already; a label that fits nowhere is left out (its line stays,
and the readout below the plot lists every line).
"""

from __future__ import annotations

from typing import Sequence

#: a rough width of one label character and the height of one row, in pixels
CHAR_PX = 7.5
ROW_PX = 16.0
#: room kept between two labels of one row
GAP_PX = 10.0


def label_rows(height_px: float, top: float = 0.92, rows: int = 4) -> list[float]:
    """Row heights as fractions of the plot height (1 = top), ``ROW_PX`` apart.

    As many of ``rows`` as fit in the upper half of a plot ``height_px`` tall.
    """
    step = ROW_PX / max(float(height_px), 1.0)
    out = [top - i * step for i in range(rows)]
    return [h for h in out if h >= 0.5] or [top]


def place_labels(lines: Sequence[tuple[float, str, int]], x0: float, x1: float,
                 width_px: float, height_px: float) -> list[float | None]:
    """A row height (fraction of the plot) for each ``(hz, text, priority)``, or None.

    ``x0 .. x1`` is the frequency span the plot shows across ``width_px``
    pixels; lower ``priority`` is placed first (ties: lower frequency first).
    """
    rows = label_rows(height_px)
    span = max(float(x1) - float(x0), 1e-12)
    per_px = max(float(width_px), 1.0) / span
    taken: list[list[tuple[float, float]]] = [[] for _ in rows]
    out: list[float | None] = [None] * len(lines)
    order = sorted(range(len(lines)), key=lambda i: (lines[i][2], lines[i][0]))
    for i in order:
        hz, text, _ = lines[i]
        left = (float(hz) - x0) * per_px
        right = left + CHAR_PX * len(text) + GAP_PX
        if left < 0 or right > width_px + GAP_PX:
            continue                       # off the plot, or it would run past its edge
        for r, boxes in enumerate(taken):
            if all(right <= a or left >= b for a, b in boxes):
                boxes.append((left, right))
                out[i] = rows[r]
                break
    return out
