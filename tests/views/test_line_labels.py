"""Envelope spectrum line labels never overlap (views/line_labels.py, no Qt).

The lines are the fault frequencies of the fan bearing in sample_signals/README.md
(10 elements, d = 8.0 mm, D = 42.0 mm, 0°, shaft 29.5 Hz) through Randall & Antoni
2011 eqs. 1-4, computed here from the formulas, harmonics 1-3.
"""

import math

from scalesieve.views.line_labels import CHAR_PX, ROW_PX, label_rows, place_labels


def _fan_lines():
    n, d, pitch, shaft = 10, 8.0, 42.0, 29.5
    r = d / pitch * math.cos(0.0)
    base = {"ftf": shaft / 2 * (1 - r), "bpfo": n * shaft / 2 * (1 - r),
            "bpfi": n * shaft / 2 * (1 + r), "bsf": pitch / (2 * d) * shaft * (1 - r * r)}
    return [(h * hz, (f"{h}× " if h > 1 else "") + name.upper(), h)
            for name, hz in base.items() for h in (1, 2, 3)]


def _boxes(lines, rows, x1, width):
    per_px = width / x1
    return [(row, hz * per_px, hz * per_px + CHAR_PX * len(text))
            for (hz, text, _), row in zip(lines, rows) if row is not None]


def test_labels_on_a_short_wide_plot_do_not_overlap():
    lines = _fan_lines()
    for width, height in ((800, 110), (500, 110), (1400, 300)):
        rows = place_labels(lines, 0.0, 700.0, width, height)
        boxes = _boxes(lines, rows, 700.0, width)
        for i, (ra, la, ha) in enumerate(boxes):
            for rb, lb, hb in boxes[i + 1:]:
                if abs(ra - rb) * height < ROW_PX - 1e-9:     # same row
                    assert ha <= lb or hb <= la
        # every first harmonic is labelled before any higher one is
        firsts = [r for (hz, t, h), r in zip(lines, rows) if h == 1]
        assert all(r is not None for r in firsts)


def test_rows_fit_the_plot_and_stay_apart():
    rows = label_rows(110)
    assert len(rows) >= 2 and all(0.5 <= r <= 1 for r in rows)
    assert all(abs(a - b) * 110 >= ROW_PX - 1e-9 for a, b in zip(rows, rows[1:]))
    # a label that would run past the right edge is left out
    assert place_labels([(690.0, "BPFO", 1)], 0.0, 700.0, 500, 110) == [None]


def test_measured_widths_keep_labels_apart_where_the_rough_width_would_not():
    # a font twice as wide as CHAR_PX: labels measured so (as the window measures them
    # with its font) are kept apart by their drawn widths, not the rough guess
    lines = _fan_lines()
    width, height, x1 = 520.0, 110.0, 600.0
    wide = lambda t: 2 * CHAR_PX * len(t)  # noqa: E731
    rows = place_labels(lines, 0.0, x1, width, height, text_px=wide, row_px=ROW_PX)
    per_px = width / x1
    boxes = [(row, hz * per_px, hz * per_px + wide(text))
             for (hz, text, _), row in zip(lines, rows) if row is not None]
    assert boxes
    for i, (r1, a1, b1) in enumerate(boxes):
        for r2, a2, b2 in boxes[i + 1:]:
            assert r1 != r2 or b1 <= a2 or b2 <= a1
    rough = place_labels(lines, 0.0, x1, width, height)
    assert sum(r is not None for r in rough) > len(boxes)   # the guess packs more in


def test_taller_labels_get_rows_their_own_height_apart():
    rows = label_rows(200.0, row_px=24.0)
    # fractions of a 200 px plot: 24 px apart
    assert all(abs((a - b) * 200.0 - 24.0) < 1e-9 for a, b in zip(rows, rows[1:]))
