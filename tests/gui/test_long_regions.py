"""Region edits drawn on the long recording's Scale map, against the in-memory clean.

References: the in-memory model of the same recipe (its own tests hold it to
``pywt.waverec`` of the edited ``pywt.wavedec``), its export (``api.export``),
``soundfile`` for reading the files written, and PyWavelets' ``wavedec`` for
the coefficients a region mutes.
"""

import numpy as np
import pytest
import pywt
import soundfile as sf
from PySide6.QtCore import QPointF, Qt
from PySide6.QtTest import QTest
from PySide6.QtWidgets import QApplication

from scalesieve.core import transforms as tf
from scalesieve.core.transforms import TransformSpec

RATE = 20000
N = 400_001
SPEC = TransformSpec(wavelet="db4", mode="symmetric", level=8)


@pytest.fixture
def long_file(tmp_path, monkeypatch):
    monkeypatch.setenv("SCALESIEVE_CACHE_DIR", str(tmp_path / "cache"))
    rng = np.random.default_rng(21)
    t = np.arange(N) / RATE
    x = 0.3 * np.sin(2 * np.pi * 31 * t) + 0.03 * rng.standard_normal(N)
    x[::4000] += 0.7                               # impacts, five a second
    path = str(tmp_path / "fan_night.wav")
    sf.write(path, x, RATE, subtype="DOUBLE")
    return path, x


@pytest.fixture
def long_window(qtbot, qapp):
    from scalesieve.gui.app import make_application
    from scalesieve.gui.long_window import LongWindow

    app = make_application()
    app.setProperty("scalesieve_quiet_errors", True)
    w = LongWindow()
    w.exact_most = 1 << 15              # so that the whole view comes from the summary
    qtbot.addWidget(w)
    w.resize(1280, 800)
    w.show()
    yield w
    w.close()
    w.deleteLater()
    app.processEvents()
    app.setProperty("scalesieve_quiet_errors", None)


def drag(w, t0, row0, t1, row1):
    """Press, move and release the left button over the long Scale map (view coordinates)."""
    plot, vb = w.scale_map.plot, w.scale_map.view

    def at(t, y):
        return plot.mapFromScene(vb.mapViewToScene(QPointF(t, y)))
    p0, p1 = at(t0, row0), at(t1, row1)
    vp = plot.viewport()
    QTest.mousePress(vp, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, p0)
    for i in range(1, 9):
        QTest.mouseMove(vp, p0 + (p1 - p0) * (i / 8))
    QTest.mouseRelease(vp, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, p1)
    QApplication.processEvents()


def _columns_of(t0, t1, columns, lo_s, hi_s):
    edges = t0 + (t1 - t0) * np.arange(columns + 1) / columns
    return (edges[1:] / RATE > lo_s) & (edges[:-1] / RATE < hi_s)


@pytest.mark.parametrize("mode", ["symmetric", "periodization"])
def test_a_dragged_region_is_shown_at_once_and_exported_as_the_whole_array_clean(
        long_window, long_file, tmp_path, mode):
    from scalesieve import api

    path, x = long_file
    w = long_window
    spec = TransformSpec(wavelet="db4", mode=mode, level=8)
    w.open_long(path, spec)
    assert w.wait_idle() is None
    drag(w, 5.0003, 0.2, 9.4007, 1.8)                  # rows 0 and 1: d1 and d2
    (e,) = w.regions.edits
    assert e.op == "region" and e.levels == (1, 2) and e.gain == 0.0     # −∞ dB first
    tile = 2 ** 2 / RATE                               # d2: one coefficient per 4 samples
    width = (e.stop_s - e.start_s) / tile
    assert width == pytest.approx(round(width), abs=1e-6)
    assert e.start_s <= 5.0003 + tile / 2 and e.stop_s >= 9.4007 - tile / 2
    (outline,) = w.regions.outlines()
    assert outline.pos().x() == pytest.approx(e.start_s)
    assert "1 region edit" in w.scale_map.region_line.count.text()
    assert w.wait_idle() is None
    pic = w.picture
    assert not pic.exact and w.edits()[-1] == e
    # the whole view at once: d1 and d2 dark in every column wholly inside the region,
    # bright outside it (the impacts), d3 untouched
    cols = pic.magnitudes.shape[1]
    inside = _columns_of(0, N, cols, e.start_s + 0.05, e.stop_s - 0.05)
    outside = ~_columns_of(0, N, cols, e.start_s - 0.05, e.stop_s + 0.05)
    assert np.all(pic.magnitudes[0][inside] == 0) and np.all(pic.magnitudes[1][inside] == 0)
    assert np.all(pic.magnitudes[0][outside] > 0)
    assert np.all(pic.magnitudes[2][inside] > 0)
    # the field sets the selected region's gain
    assert w.wait_idle(sweep=True) is None            # the wide view's pass, for the mute
    w.scale_map.region_line.gain.setValue(-20.0)
    assert w.regions.edits[0].gain == pytest.approx(10 ** (-20 / 20))   # dB definition
    assert w.wait_idle(sweep=True) is None            # the change patched into that pass
    e = w.regions.edits[0]
    wide = w.picture
    assert not wide.exact and wide.cleaned_done == 1.0
    model = api.build_model(api.load(path), transform=spec, edits=w.edits())
    y = model.cleaned()[:, 0]
    np.testing.assert_allclose(np.nanmax(wide.cleaned[1]), y.max(), atol=1e-12)
    np.testing.assert_allclose(np.nanmin(wide.removed[0]), (x - y).min(), atol=1e-12)
    # zoomed in: exact coefficients, d1 at -20 dB inside the region (PyWavelets' wavedec)
    t0, t1 = int(6.0 * RATE), int(6.5 * RATE)
    w.set_view(t0, t1)
    assert w.wait_idle() is None
    assert w.picture.exact
    d1 = pywt.wavedec(x, "db4", mode=mode, level=8)[-1]
    step, shift = tf._position_formula(1, spec)
    k = np.arange(d1.shape[0])
    seen = (step * k + shift >= t0) & (step * k + shift < t1)
    np.testing.assert_allclose(w.picture.magnitudes[0].max(), 0.1 * np.abs(d1[seen]).max(),
                               rtol=1e-9)
    # the export: the in-memory whole-array clean of the same recipe
    out = str(tmp_path / "cleaned.wav")
    assert w.export(out, subtype="DOUBLE")
    assert w.wait_idle() is None
    got, rate = sf.read(out, dtype="float64")
    model = api.build_model(api.load(path), transform=spec, edits=w.edits())
    want_path = str(tmp_path / "in_memory.wav")
    api.export(model, want_path, subtype="DOUBLE")
    want, _ = sf.read(want_path, dtype="float64")
    assert got.shape == want.shape == (N,)
    np.testing.assert_allclose(got, want, atol=1e-12)
    assert np.max(np.abs(got - x)) > 0.01          # the region did take something out


def test_a_selected_region_is_removed_with_delete_and_moves_with_its_outline(long_window,
                                                                            long_file):
    path, _ = long_file
    w = long_window
    w.open_long(path, SPEC)
    assert w.wait_idle() is None
    w.scale_map.rows.rows[3][0].setValue(-6.0)        # a band gain beside it
    drag(w, 2.0, 2.2, 3.0, 3.8)                        # d3 and d4
    assert w.wait_idle() is None
    # a second QTest drag in one test does not reach pyqtgraph's scene (the in-memory
    # Scale map's the same): the finished drag as the view box reports it
    w.scale_map.view.rectangleDrawn.emit(12.0, 13.0, 0.2, 0.8)     # d1
    assert [r.levels for r in w.regions.edits] == [(3, 4), (1,)]
    assert [x.op for x in w.edits()] == ["gain", "region", "region"]
    assert w.regions.selected == 1
    # moved and resized through its outline: snapped again to whole tiles
    roi = [o for o in w.regions.outlines() if o.index == 0][0]
    roi.setPos((4.0, 2.0))
    roi.sigRegionChangeFinished.emit(roi)
    assert w.wait_idle() is None
    moved = w.regions.edits[0]
    assert moved.start_s == pytest.approx(4.0, abs=2 ** 4 / RATE)
    assert moved.levels == (3, 4)
    w.regions.select(0)
    QTest.keyClick(w.scale_map.plot, Qt.Key.Key_Delete)
    assert [r.levels for r in w.regions.edits] == [(1,)]
    assert w.wait_idle() is None
    assert [x.op for x in w.edits()] == ["gain", "region"]
    assert len(w.regions.outlines()) == 1


def test_a_recipes_gains_and_regions_open_in_their_controls(long_window, long_file):
    from scalesieve.recipe import Edit

    path, _ = long_file
    w = long_window
    gain = Edit("gain", levels=(3,), gain=0.25)            # -12.04 dB: shown to 0.1 dB
    region = Edit("region", levels=(1, 2), start_s=5.0, stop_s=6.0, gain=0.0)
    w.open_long(path, SPEC, (gain, region))
    assert w.wait_idle() is None
    assert w.edits() == (gain, region) and w.base_edits == ()
    assert w.scale_map.rows.gain(3) == 0.25                # applied as the recipe has it
    assert w.scale_map.rows.rows[3][0].text() == "-12.0 dB"
    assert w.regions.edits == [region]
    # a region before a gain: the window's order (regions last) cannot give it back, so it
    # stays the recipe's, outlined dotted; the gain after it is in its row
    w.put_edits((region, gain))
    assert w.edits() == (region, gain) and w.base_edits == (region,) and w.regions.edits == []
    assert "1 more in the recipe as opened" in w.scale_map.region_line.count.text()
