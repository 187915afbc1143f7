"""Window wording and drawing details: one rule for shares, seconds, sparse ticks, cautions."""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
import pytest

from scalesieve.gui.channel_units import RESEARCH_CAUTION, looks_physiological
from scalesieve.gui.reconstruction_pane import sparse_ticks
from scalesieve.gui.row_headers import percent_text


@pytest.mark.parametrize("share", [0.61, 0.38, 0.0904, 0.008, 0.0033, 0.001, 0.0999, 0.05])
def test_share_labels_have_two_significant_digits(share):
    # rule: two significant digits (Python's "#.2g" as the reference), "<0.1%" below 0.1 %
    text = percent_text(share)
    p = 100 * share
    if p < 0.1:
        assert text == "<0.1%"
    else:
        digits = text.rstrip("%").replace(".", "").lstrip("0")
        assert len(digits) == 2, text
        assert float(text.rstrip("%")) == pytest.approx(float(f"{p:.2g}"))


def test_removed_lane_has_at_most_two_labels():
    for lo, hi in [(-0.04, 0.02), (-0.0212, 0.0212), (-3.0, 5.0), (0.0, 0.0)]:
        major, minor = sparse_ticks(lo, hi)
        assert 1 <= len(major) <= 2 and minor == []
        assert all(lo <= v <= hi or v == 0 for v, _ in major)


def test_removed_lane_too_short_for_two_labels_has_one_at_zero_saying_its_size():
    # 0 and 0.02 on a lane 24 px high would sit 8 px apart, under one 12 px label's height
    major, _ = sparse_ticks(-0.03, 0.03, room_px=24, label_px=12)
    assert major == [(0.0, "±0.02")]
    major, _ = sparse_ticks(-0.03, 0.03, room_px=80, label_px=12)     # 27 px apart: both
    assert [t for _, t in major] == ["0", "0.02"]


def test_physiological_names_and_units_are_recognised():
    assert looks_physiological(["signal_mV"])
    assert looks_physiological(["ECG lead II"])
    assert looks_physiological(["ch0"], "night.edf")
    assert not looks_physiological(["strain_A", "ch1"], "rig.csv")
    assert "research" in RESEARCH_CAUTION and "diagnosis" in RESEARCH_CAUTION


def test_time_axis_stays_in_seconds_for_a_short_file(window, qtbot):
    from sample_files import open_sample

    open_sample(window, "field_mic_clicks.flac")
    ax = window.reconstruction.removed_plot.getAxis("bottom")
    # pyqtgraph: with the SI prefix off the axis keeps scale 1 and its unit "s"
    assert ax.autoSIPrefix is False and ax.labelUnits == "s"


def test_status_bar_says_the_transform_as_the_map_line_does(window, qtbot):
    from sample_files import open_sample

    m = open_sample(window, "pump_bearing.wav")
    assert window.status_transform.text() == window.transform_line.text() or \
        window.status_transform.text() in window.transform_line.text()
    assert " · " in window.status_transform.text() and str(m.level) in \
        window.status_transform.text()


def test_opening_a_trace_in_mv_shows_the_research_caution(window, qtbot):
    from sample_files import open_sample

    open_sample(window, "lab_trace_baseline.csv")
    assert RESEARCH_CAUTION in window.statusBar().currentMessage()


def test_removed_trace_in_a_lane_is_lighter_and_beneath(window, qtbot):
    from sample_files import open_sample

    open_sample(window, "pump_bearing.wav")
    row = next(iter(window.bands.rows.values()))
    assert row.base.zValue() < row.curve.zValue()
    assert pg.mkColor(row.base.opts["pen"].color()).alpha() < 255
