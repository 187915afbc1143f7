"""The window driven through its real widgets, offscreen.

References outside the project: Python's ``wave`` module reads the demo WAV
(the samples the window must show), PyWavelets' ``wavedec``/``waverec``
give the cleaned signal a muted band must produce, Python's ``csv`` module
reads the logger CSV the import dialog must agree with, and the PNG
specification (IHDR chunk) gives the snapshot's size.
"""

import csv
import json
import os
import struct
import subprocess
import sys
import wave

import numpy as np
import pytest
import pywt
from PySide6.QtCore import QPointF, Qt, QTimer
from PySide6.QtTest import QTest
from PySide6.QtWidgets import QApplication

from sample_files import open_sample, sample

PUMP = "pump_bearing.wav"


def wave_samples(path):
    """Samples of a 16-bit PCM WAV as floats, read by Python's wave module."""
    with wave.open(path, "rb") as w:
        assert w.getsampwidth() == 2
        raw = w.readframes(w.getnframes())
        ch = w.getnchannels()
    x = np.frombuffer(raw, dtype="<i2").astype(np.float64) / 32768.0
    return x.reshape(-1, ch)


def pywt_cleaned(x, spec, zero_levels):
    """PyWavelets reference: decompose, zero some detail levels, reconstruct."""
    c = pywt.wavedec(x, spec.wavelet, mode=spec.mode, level=spec.level)
    for j in zero_levels:
        c[spec.level - j + 1] = np.zeros_like(c[spec.level - j + 1])
    return pywt.waverec(c, spec.wavelet, mode=spec.mode)[: x.shape[0]]


def drag_on_map(window, t0, row0, t1, row1):
    """Press, move and release the left button over the Scale map (view coordinates)."""
    plot = window.scale_map.plot
    vb = window.scale_map.view

    def at(t, y):
        return plot.mapFromScene(vb.mapViewToScene(QPointF(t, y)))

    p0, p1 = at(t0, row0), at(t1, row1)
    vp = plot.viewport()
    QTest.mousePress(vp, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, p0)
    for i in range(1, 9):
        QTest.mouseMove(vp, p0 + (p1 - p0) * (i / 8))
    QTest.mouseRelease(vp, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, p1)
    QApplication.processEvents()


def test_loading_a_sample_fills_every_pane(window):
    m = open_sample(window, PUMP)
    ref = wave_samples(sample(PUMP))
    np.testing.assert_array_equal(m.original(0), ref[:, 0])
    status = window.describe_recording()
    # Demo facts from sample_signals/README.md: 25 600 Hz, 4.000 s, 102 400 samples.
    assert "25600 Hz" in status and "102 400 samples" in status and "1 channel" in status
    rows = len(m.band_keys)
    img = window.scale_map.map_image()
    assert img.shape[0] == rows and img.shape[1] >= 300
    heads = window.scale_map.headers
    assert list(heads) == m.band_keys
    assert heads[1].name.text() == "d1" and "kHz" in heads[1].hz.text()
    assert heads["a"].name.text() == f"a{m.level}" and "Hz" in heads["a"].hz.text()
    assert window.bands.band_keys == m.band_keys
    # lanes' rows are made for the lanes open (the defaults), not for every band
    assert window.bands.open_keys and list(window.bands.rows) == window.bands.open_keys
    assert heads[1].hz.text() == "6.4–12.8 kHz"  # 25 600/4 .. 25 600/2 Hz (dyadic bands)
    xs, ys = window.reconstruction.trace_data("original")
    assert xs.size > 0
    # Peak preserving: the drawn trace reaches the recording's extremes
    # (README: peak |sample| 0.555 at the knock).
    assert ys.max() == ref[:, 0].max() and ys.min() == ref[:, 0].min()


def test_muting_a_band_changes_the_cleaned_trace_and_the_recipe(window, qtbot):
    m = open_sample(window, PUMP)
    before = window.reconstruction.trace_data("cleaned")[1].copy()
    row = window.scale_map.headers[1]
    qtbot.mouseClick(row.mute, Qt.MouseButton.LeftButton)
    assert [e.to_json() for e in m.edits] == [{"op": "gain", "levels": [1], "gain": 0.0}]
    assert window.recipe.tree.topLevelItemCount() == 1
    assert window.recipe.tree.topLevelItem(0).text(1) == "mute d1 (−∞ dB)"
    ref = pywt_cleaned(m.original(0), m.spec, [1])
    np.testing.assert_allclose(m.cleaned(0), ref, rtol=0, atol=1e-12)
    after = window.reconstruction.trace_data("cleaned")[1]
    assert not np.array_equal(before, after)
    # The drawn cleaned trace keeps the reference's extremes.
    assert after.max() == pytest.approx(ref.max(), abs=1e-12)
    assert row.mute.isChecked() and row.gain.text() == "−∞ dB"
    # Clicking again keeps the band: the edit goes, the signal comes back.
    qtbot.mouseClick(row.mute, Qt.MouseButton.LeftButton)
    assert m.edits == ()


def test_a_band_gain_and_threshold_are_recipe_entries(window):
    m = open_sample(window, PUMP)
    head = window.scale_map.headers[2]
    head.gain.setValue(-6.0)
    assert m.edits[0].op == "gain" and m.edits[0].levels == (2,)
    assert m.edits[0].gain == pytest.approx(10 ** (-6 / 20))   # dB definition
    window.scale_map.select_rows([2])
    form = window.scale_map.form
    form.rule.setCurrentIndex(form.rule.findData("universal"))
    assert [e.op for e in m.edits] == ["gain", "threshold"]
    assert m.edits[1].levels == (2,) and m.edits[1].rule == "universal"
    assert head.mark.text() == "λ"
    window.bands.set_lane(2, True)
    row = window.bands.rows[2]
    # Universal threshold (Donoho & Johnstone 1994): sigma * sqrt(2 ln n), sigma from
    # median |d1| / Phi^-1(0.75) (SciPy's normal quantile), n the number of samples.
    from scipy.stats import norm

    d1 = m.coefficients(0, 1)
    sigma = np.median(np.abs(d1[d1 != 0])) / norm.ppf(0.75)
    lam = sigma * np.sqrt(2 * np.log(m.recording.n))
    assert row.threshold_value == pytest.approx(lam, rel=1e-9)
    form.rule.setCurrentIndex(0)           # off
    assert [e.op for e in m.edits] == ["gain"]
    assert head.mark.text() == ""


def test_a_region_dragged_on_the_scale_map_leaves_the_rest_unchanged(window):
    m = open_sample(window, PUMP)
    x = wave_samples(sample(PUMP))[:, 0]
    drag_on_map(window, 1.0, 0.3, 1.5, 1.7)      # rows 0 and 1: d1 and d2
    assert len(m.edits) == 1
    e = m.edits[0]
    assert e.op == "region" and e.levels == (1, 2) and e.gain == 0.0
    assert e.start_s == pytest.approx(1.0, abs=0.02) and e.stop_s == pytest.approx(1.5, abs=0.02)
    assert window.scale_map.selected == 0 and len(window.scale_map.outlines()) == 1
    y = m.cleaned(0)
    rate = m.recording.rate
    # A level-j coefficient reaches (L - 1) * 2**j samples (DESIGN.md); d2 of db4: 7 * 4.
    reach = 7 * 4 + 8
    a, b = int(e.start_s * rate) - reach, int(e.stop_s * rate) + reach
    np.testing.assert_array_equal(y[:a], x[:a])
    np.testing.assert_array_equal(y[b:], x[b:])
    assert np.abs(y[a:b] - x[a:b]).max() > 1e-3
    # Removing the selected outline with the Delete key removes the edit.
    window.scale_map.setFocus()
    QTest.keyClick(window.scale_map, Qt.Key.Key_Delete)
    assert m.edits == ()


def test_undo_and_redo_restore_exactly(window, qtbot):
    m = open_sample(window, PUMP)
    x = m.original(0).copy()
    qtbot.mouseClick(window.scale_map.headers[1].mute, Qt.MouseButton.LeftButton)
    drag_on_map(window, 2.5, 1.2, 2.7, 2.8)
    after_two = m.cleaned(0).copy()
    recipe_two = m.recipe().to_json()
    window.act_undo.trigger()
    window.act_undo.trigger()
    assert m.edits == ()
    qtbot.waitUntil(lambda: not window.adapter.settle_pending, timeout=5000)
    np.testing.assert_array_equal(m.cleaned(0), x)
    assert window.recipe.tree.topLevelItemCount() == 0
    window.act_redo.trigger()
    window.act_redo.trigger()
    qtbot.waitUntil(lambda: not window.adapter.settle_pending, timeout=5000)
    assert m.recipe().to_json() == recipe_two
    # Exactly what a fresh model of the same recipe computes (the command line's numbers).
    from scalesieve import api

    fresh = api.build_model(m.recording, m.recipe())
    np.testing.assert_array_equal(m.cleaned(0), fresh.cleaned(0))
    np.testing.assert_allclose(after_two, fresh.cleaned(0), rtol=0, atol=1e-12)
    # The platform's standard shortcuts drive the same actions.
    from PySide6.QtGui import QKeySequence

    assert window.act_undo.shortcut() == QKeySequence(QKeySequence.StandardKey.Undo)
    assert window.act_redo.shortcut() == QKeySequence(QKeySequence.StandardKey.Redo)


def test_changing_the_wavelet_reruns_the_model_and_keeps_the_recipe(window, qtbot):
    m = open_sample(window, PUMP)
    qtbot.mouseClick(window.scale_map.headers[1].mute, Qt.MouseButton.LeftButton)
    tc = window.transform
    with qtbot.waitSignal(window.adapter.modelReplaced, timeout=30000):
        tc.family.setCurrentIndex(tc.family.findData("sym"))
        tc.order.setCurrentIndex(tc.order.findData("sym8"))
    window.adapter.wait_idle()
    assert window.adapter.model is m            # the same model, re-decomposed
    assert m.spec.wavelet == "sym8"
    assert "Symlets" in tc.description.text() and "8 vanishing moments" in tc.description.text()
    assert [e.to_json() for e in m.edits] == [{"op": "gain", "levels": [1], "gain": 0.0}]
    ref = pywt_cleaned(m.original(0), m.spec, [1])
    np.testing.assert_allclose(m.cleaned(0), ref, rtol=0, atol=1e-12)
    assert "sym8" in window.status_transform.text()


def test_rapid_level_changes_coalesce_to_the_latest(window, qtbot):
    m = open_sample(window, PUMP)
    runs = []
    window.adapter.modelReplaced.connect(lambda: runs.append(m.spec.level))
    tc = window.transform
    for level in (5, 6, 7, 8, 6):
        tc.level_slider.setValue(level)        # as fast as a dragged slider
    assert window.adapter.busy
    window.adapter.wait_idle()
    assert m.spec.level == 6 and runs == [6]
    assert len(window.bands.band_keys) == 7 and window.scale_map.map_image().shape[0] == 7


def test_export_from_the_window_equals_scalesieve_clean(window, qtbot, tmp_path):
    from scalesieve.cli import main

    m = open_sample(window, PUMP)
    qtbot.mouseClick(window.scale_map.headers[1].mute, Qt.MouseButton.LeftButton)
    drag_on_map(window, 2.55, 1.2, 2.7, 2.8)
    window.scale_map.select_rows([4])
    form = window.scale_map.form
    form.rule.setCurrentIndex(form.rule.findData("bayes"))
    recipe = tmp_path / "r.json"
    out_window = tmp_path / "window.wav"
    out_cli = tmp_path / "cli.wav"
    assert window.save_recipe(str(recipe))
    assert window.export_signal(str(out_window), "cleaned") is not None
    assert json.loads(recipe.read_text())["edits"] == [e.to_json() for e in m.edits]
    assert main(["clean", sample(PUMP), "-o", str(out_cli), "--recipe", str(recipe)]) == 0
    a, b = wave_samples(str(out_window)), wave_samples(str(out_cli))
    assert a.shape == b.shape
    np.testing.assert_array_equal(a, b)
    removed = tmp_path / "removed.csv"
    assert window.export_signal(str(removed), "removed") is not None
    with open(removed, newline="") as fh:
        rows = list(csv.reader(fh))
    assert rows[0] == ["time_s", "ch0"] and len(rows) == m.recording.n + 1


def test_decimal_comma_logger_csv_through_the_import_dialog(window, qtbot):
    from scalesieve.gui.csv_import_dialog import CsvImportDialog

    path = sample("rig_strain_logger.csv")
    # Reference: Python's csv module, ';' delimiter, decimal comma, '#' comment lines.
    with open(path, newline="") as fh:
        body = [r for r in csv.reader((ln for ln in fh if not ln.startswith("#")),
                                      delimiter=";")]
    header, data = body[0], np.array([[float(c.replace(",", ".")) for c in r] for r in body[1:]])

    seen = {}

    def drive():
        dlg = window._import_dialog
        seen["found"] = dlg.found_label.text()
        seen["head"] = [dlg.table.horizontalHeaderItem(j).text() for j in range(4)]
        seen["cell"] = dlg.table.item(2, 1).text()
        seen["status"] = dlg.status.text()
        dlg.accept()

    QTimer.singleShot(200, drive)
    window.open_path(path)                       # through the dialog
    assert window.adapter.wait_idle(60) is None
    assert "semicolon" in seen["found"] and "decimal comma" in seen["found"]
    assert seen["head"][0].startswith("time [ms]") and "(time, ms)" in seen["head"][0]
    assert seen["head"][1:] == header[1:]
    assert float(seen["cell"]) == data[2, 1]
    assert "3 channels" in seen["status"] and "1000 Hz" in seen["status"]
    rec = window.adapter.recording
    assert rec.channel_names == header[1:]
    assert rec.rate == pytest.approx(1000.0)     # 1 ms steps in the time column
    np.testing.assert_array_equal(rec.samples, data[:, 1:])
    assert window.channel_box.count() == 3
    window.channel_box.setCurrentIndex(2)
    assert window.scale_map.channel == 2 and window.bands.channel == 2


def test_import_dialog_shows_a_wrong_decimal_mark_and_refuses(qtbot):
    from scalesieve.gui.csv_import_dialog import CsvImportDialog

    dlg = CsvImportDialog(sample("rig_strain_logger.csv"))
    qtbot.addWidget(dlg)
    ok = dlg.buttons.buttons()[0]
    assert ok.isEnabled()
    dlg.decimal.setCurrentIndex(dlg.decimal.findData("."))
    assert not ok.isEnabled() and "is not a number" in dlg.status.text()
    dlg.decimal.setCurrentIndex(0)
    dlg.channels.item(1).setCheckState(Qt.CheckState.Unchecked)
    rec = dlg.recording()
    assert rec.channel_names == ["strain_A", "strain_C"]


def test_bad_file_gives_the_command_lines_one_line_message(window, tmp_path):
    from scalesieve import api
    from scalesieve.errors import ScalesieveError

    bad = tmp_path / "broken.wav"
    bad.write_bytes(b"RIFF\x00\x00\x00\x00WAVEjunk")
    window.open_path(str(bad))
    problem = window.adapter.wait_idle(30)
    with pytest.raises(ScalesieveError) as info:
        api.load(str(bad))
    assert problem == info.value.one_line()
    assert QApplication.instance().property("scalesieve_last_error") == problem
    assert "Traceback" not in problem and "\n" not in problem


def test_recipe_pane_edits_in_place_reorders_and_deletes(window, qtbot):
    m = open_sample(window, PUMP)
    qtbot.mouseClick(window.scale_map.headers[1].mute, Qt.MouseButton.LeftButton)
    window.scale_map.threshold_all("universal", "soft")
    tree = window.recipe.tree
    assert tree.topLevelItemCount() == 2
    gain_item = tree.topLevelItem(0).child(1)
    assert gain_item.text(0) == "gain"
    gain_item.setText(1, "-6")                 # gains are typed in dB
    assert m.edits[0].gain == pytest.approx(10 ** (-6 / 20))   # dB definition
    QApplication.processEvents()               # the list is redrawn after an in-place edit
    assert "−6.0 dB" in tree.topLevelItem(0).text(1)
    levels_item = tree.topLevelItem(0).child(0)
    levels_item.setText(1, "1-3")
    assert m.edits[0].levels == (1, 2, 3)
    QApplication.processEvents()
    tree.topLevelItem(1).setCheckState(0, Qt.CheckState.Unchecked)
    assert m.edits[1].enabled is False
    QApplication.processEvents()
    tree.setCurrentItem(tree.topLevelItem(1))
    window.recipe.up.click()
    assert [e.op for e in m.edits] == ["threshold", "gain"]
    tree.topLevelItem(1).child(1).setText(1, "abc")
    assert "not a number" in QApplication.instance().property("scalesieve_last_error")
    QApplication.processEvents()
    tree.setCurrentItem(tree.topLevelItem(0))
    window.recipe.remove.click()
    assert [e.op for e in m.edits] == ["gain"]


def test_one_time_axis_for_every_pane(window):
    open_sample(window, PUMP)
    window.time_axis.set_range(1.0, 1.25)
    QApplication.processEvents()
    boxes = [window.scale_map.view, window.reconstruction.plot.getViewBox()]
    boxes += [r.plot.getViewBox() for r in window.bands.rows.values()]
    for vb in boxes:
        lo, hi = vb.viewRange()[0]
        assert lo == pytest.approx(1.0) and hi == pytest.approx(1.25)
    assert window.overview.region.getRegion() == pytest.approx((1.0, 1.25))
    # Zooming one pane's box moves the others.
    window.reconstruction.plot.getViewBox().setXRange(2.0, 3.0, padding=0)
    lo, hi = window.scale_map.view.viewRange()[0]
    assert (lo, hi) == pytest.approx((2.0, 3.0))
    # Zoomed in far enough, traces are the samples themselves.
    window.time_axis.set_range(2.0, 2.01)
    window.reconstruction.redraw()
    xs, ys = window.reconstruction.trace_data("original")
    k = np.round(xs * 25600).astype(int)
    np.testing.assert_array_equal(ys, wave_samples(sample(PUMP))[k, 0])


def test_listening_is_off_with_the_reason_when_there_is_no_sound_library(window):
    from scalesieve.gui import playback

    ok, reason = playback.output_status()
    if ok:
        pytest.skip("an audio output exists here")
    for a in window.act_play.values():
        assert not a.isEnabled() and reason in a.toolTip()


def test_settings_keep_the_colour_scale(window, tmp_path):
    window.scale_map.scale_box.setCurrentText("linear")
    window.settings.sync()
    from scalesieve.gui import window_settings as ws

    again = ws.open_settings(str(tmp_path / "settings.ini"))
    assert again.value("map/scale") == "linear"


def test_snapshot_command_writes_a_1600_by_1000_png(tmp_path):
    out = tmp_path / "look.png"
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen")
    cmd = [sys.executable, "-m", "scalesieve", sample("lab_trace_baseline.csv"),
           "--snapshot", str(out)]
    r = subprocess.run(cmd, capture_output=True, text=True, env=env, timeout=120)
    assert r.returncode == 0, r.stderr
    head = out.read_bytes()[:24]
    # PNG signature and IHDR width/height (PNG specification, section 11.2.2).
    assert head[:8] == b"\x89PNG\r\n\x1a\n"
    assert struct.unpack(">II", head[16:24]) == (1600, 1000)
    # An existing file is kept unless --force (docs/reference.md).
    r = subprocess.run(cmd, capture_output=True, text=True, env=env, timeout=120)
    assert r.returncode == 2 and r.stderr.count("\n") == 1 and "--force" in r.stderr


def test_crosshair_readout_names_time_band_and_coefficient(window):
    m = open_sample(window, PUMP)
    sm = window.scale_map
    sm._hovered(1.25, 1.5)                     # row 1: d2
    text = sm.readout_label.text()
    # The coefficient nearest 1.25 s, by PyWavelets' own decomposition.
    c = pywt.wavedec(m.original(0), m.spec.wavelet, mode=m.spec.mode, level=m.spec.level)[-2]
    times = m.coefficient_times(0, 2)
    k = int(np.argmin(np.abs(times - 1.25)))
    assert "t 1.25 s" in text and "3.2–6.4 kHz (d2)" in text
    assert f"{c[k]:+.4g}" in text
    assert sm.cross_v.isVisible() and sm.cross_v.value() == pytest.approx(1.25)


def test_a_selected_region_outline_moves_and_resizes_its_edit(window):
    m = open_sample(window, PUMP)
    drag_on_map(window, 1.0, 0.3, 1.5, 1.7)
    roi = window.scale_map.outlines()[0]
    assert roi.getHandles()                    # selected: handles to resize
    roi.setPos((2.0, 1.0), finish=False)       # one row down: d2, d3
    roi.setSize((0.25, 2.0), finish=True)
    e = m.edits[0]
    # snapped to whole tiles of d3: one coefficient per 2^3 samples (dyadic DWT)
    tile = 2 ** 3 / m.recording.rate
    assert abs(e.start_s - 2.0) <= tile and abs(e.stop_s - 2.25) <= tile
    assert e.levels == (2, 3)
    assert len(m.edits) == 1 and m.can_undo
    QApplication.processEvents()               # outlines are redrawn after the drag
    roi = window.scale_map.outlines()[0]
    assert roi.pos().x() == pytest.approx(e.start_s) and roi.size().y() == pytest.approx(2.0)


def test_the_undecimated_transform_draws_too(window, qtbot):
    m = open_sample(window, "lab_trace_baseline.csv")
    tc = window.transform
    tc.kind.setCurrentIndex(tc.kind.findData("swt"))
    assert window.adapter.wait_idle(60) is None
    assert m.spec.kind == "swt"
    qtbot.mouseClick(window.scale_map.headers[1].mute, Qt.MouseButton.LeftButton)
    window.time_axis.set_range(5.0, 5.5)
    window.bands.set_lane(2, True)
    window.bands.redraw()
    xs, ys = window.bands.rows[2].curve.getData()
    comp = m.band_component(0, 2)
    k = np.round(xs * m.recording.rate).astype(int)
    np.testing.assert_allclose(ys, comp[k], rtol=0, atol=1e-12)
    assert window.scale_map.map_image().shape[0] == m.level + 1


def test_a_region_repaints_only_its_columns_of_the_scale_map_and_they_are_right(window):
    m = open_sample(window, PUMP)
    sm = window.scale_map
    before = sm.map_image().copy()
    drag_on_map(window, 2.0, 0.3, 2.2, 0.7)     # d1 only
    after = sm.map_image()
    t0, t1, width, _ = sm._row_view
    # Reference: the largest |edited coefficient| per column, worked out here by a loop.
    e = m.edited_coefficients(0, 1)
    times = m.coefficient_times(0, 1)
    edges = t0 + (t1 - t0) * np.arange(width + 1) / width
    for c in range(width):
        inside = (times >= edges[c] - 1e-12) & (times < edges[c + 1] - 1e-12)
        if inside.any():
            assert after[0, c] == pytest.approx(np.abs(e[inside]).max(), abs=1e-15)
    changed = np.flatnonzero(after[0] != before[0])
    assert changed.size and edges[changed[0]] >= 1.99 and edges[changed[-1] + 1] <= 2.21
    np.testing.assert_array_equal(after[1:], before[1:])


def test_a_long_band_zoomed_out_is_drawn_from_its_block_peaks(window, monkeypatch):
    # Every band counts as long here: the Scale map's rows come from the peaks
    # made in the worker.  Reference: Python's max of |coefficient| over each
    # column's coefficients, and over that span widened by one block each side.
    from scalesieve.gui import scale_map

    monkeypatch.setattr(scale_map, "PEAKS_FROM", 0)
    m = open_sample(window, PUMP)
    sm = window.scale_map
    t0, t1, width, _ = sm._row_view
    pic = window.adapter.pictures(0)
    img = sm.map_image()
    c = m.coefficients(0, 1)
    block = pic.coef_peaks[1][0]
    first, step = sm._times[1]
    edges = np.clip(np.ceil((t0 + (t1 - t0) * np.arange(width + 1) / width - first) / step),
                    0, c.shape[0]).astype(int)
    assert (edges[1:] - edges[:-1]).min() >= 2 * block      # the peaks were used
    for col, (a, b) in enumerate(zip(edges[:-1], edges[1:])):
        true = float(np.abs(c[a:b]).max())
        wide = float(np.abs(c[max(0, a - block):b + block]).max())
        assert true <= img[0, col] <= wide
