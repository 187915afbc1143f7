"""Files in and out of the window: recipes, pictures, the band table, drops, recent files.

References: Python's ``csv`` and ``json`` modules read what the window
writes; the PNG specification (signature, IHDR) and the SVG namespace
identify the pictures; PyWavelets' ``wavedec`` gives the band energies.
"""

import csv
import json
import struct

import numpy as np
import pytest
import pywt
from PySide6.QtCore import QMimeData, QPointF, Qt, QUrl
from PySide6.QtGui import QDropEvent
from PySide6.QtWidgets import QApplication

from sample_files import open_sample, sample

PUMP = "pump_bearing.wav"


def test_open_recipe_sets_transform_and_edits_in_one_undo_step(window, tmp_path):
    m = open_sample(window, PUMP)
    r = tmp_path / "r.json"
    r.write_text(json.dumps({"scalesieve_recipe": 1,
                             "transform": {"kind": "dwt", "wavelet": "sym6", "level": 7,
                                           "mode": "periodization"},
                             "edits": [{"op": "gain", "levels": [7], "gain": 0.0},
                                       {"op": "region", "levels": [1], "start_s": 1.0,
                                        "stop_s": 1.1, "gain": 0.5}]}))
    window.open_recipe(str(r))
    assert window.adapter.wait_idle(60) is None
    assert m.spec.wavelet == "sym6" and m.spec.level == 7 and m.spec.mode == "periodization"
    assert [e.op for e in m.edits] == ["gain", "region"]
    assert window.transform.level_spin.value() == 7
    assert len(window.bands.band_keys) == 8
    window.adapter.undo()
    assert m.edits == ()
    # Applying a recipe adds its edits after the current ones, transform kept.
    window.adapter.redo()
    window.apply_recipe(str(r))
    assert [e.op for e in m.edits] == ["gain", "region", "gain", "region"]
    assert m.spec.wavelet == "sym6"


def test_a_recipe_that_does_not_fit_is_refused_with_its_message(window, tmp_path):
    m = open_sample(window, PUMP)
    r = tmp_path / "deep.json"
    r.write_text(json.dumps({"scalesieve_recipe": 1, "edits": [
        {"op": "gain", "levels": [40], "gain": 0.0}]}))
    window.apply_recipe(str(r))
    msg = QApplication.instance().property("scalesieve_last_error")
    assert "level 40" in msg and m.edits == ()


def test_pictures_of_the_panes_png_and_svg(window, tmp_path):
    open_sample(window, "lab_trace_baseline.csv")
    png, svg = tmp_path / "p.png", tmp_path / "p.svg"
    window.render_panes(str(png))
    window.render_panes(str(svg))
    head = png.read_bytes()[:24]
    assert head[:8] == b"\x89PNG\r\n\x1a\n"     # PNG signature (PNG spec 5.2)
    w, h = struct.unpack(">II", head[16:24])
    central = window.panes_widget()
    assert (w, h) == (central.width(), central.height())
    text = svg.read_text(encoding="utf-8")
    assert "http://www.w3.org/2000/svg" in text and "<path" in text
    with pytest.raises(Exception):
        window.render_panes(str(png))            # an existing picture is kept


def test_band_table_csv_has_the_contract_fields(window, tmp_path):
    m = open_sample(window, "rig_strain_logger.csv")
    out = tmp_path / "bands.csv"
    window.export_band_table(str(out))
    with open(out, newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == 3 * (m.level + 1)
    for key in ("channel", "channel_name", "name", "low_hz", "high_hz", "energy",
                "energy_fraction", "coef_energy", "rms", "peak", "kurtosis"):
        assert key in rows[0]
    # docs/reference.md: coef_energy = sum of squares of PyWavelets' finest detail;
    # energy = sum of squares of d1's time-domain component (pywt.waverec, d1 alone).
    x = m.original(0)
    c = pywt.wavedec(x, m.spec.wavelet, mode=m.spec.mode, level=m.spec.level)
    alone = [np.zeros_like(b) for b in c[:-1]] + [c[-1]]
    comp = pywt.waverec(alone, m.spec.wavelet, mode=m.spec.mode)[:x.shape[0]]
    d1 = next(r for r in rows if r["channel"] == "0" and r["name"] == "d1")
    assert float(d1["coef_energy"]) == pytest.approx(float(np.sum(c[-1] ** 2)), rel=1e-12)
    assert float(d1["energy"]) == pytest.approx(float(np.sum(comp ** 2)), rel=1e-10)
    assert float(d1["energy_fraction"]) == pytest.approx(
        float(np.sum(comp ** 2) / np.sum(x ** 2)), rel=1e-10)
    assert float(d1["low_hz"]) == 250.0 and float(d1["high_hz"]) == 500.0   # fs/4..fs/2


def test_dropping_a_file_opens_it_and_it_joins_the_recent_files(window):
    path = sample("field_mic_clicks.flac")
    mime = QMimeData()
    mime.setUrls([QUrl.fromLocalFile(path)])
    ev = QDropEvent(QPointF(200, 200), Qt.DropAction.CopyAction, mime,
                    Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier)
    window.dropEvent(ev)
    assert window.adapter.wait_idle(60) is None
    rec = window.adapter.recording
    assert rec.channels == 2 and rec.rate == 44100.0      # sample_signals/README.md
    actions = window.recent_menu.actions()
    assert actions and actions[0].text().endswith("field_mic_clicks.flac")


def test_edits_for_this_channel_only(window, qtbot):
    m = open_sample(window, "field_mic_clicks.flac")
    window.scope_box.setChecked(True)
    window.channel_box.setCurrentIndex(1)
    qtbot.mouseClick(window.scale_map.headers[1].mute, Qt.MouseButton.LeftButton)
    assert m.edits[0].channels == (1,)
    np.testing.assert_array_equal(m.cleaned(0), m.original(0))
    assert not np.array_equal(m.cleaned(1), m.original(1))
    window.channel_box.setCurrentIndex(0)
    assert not window.scale_map.headers[1].mute.isChecked()     # channel 0 is not muted


def test_text_settings_changed_by_hand_read_with_the_same_rules(tmp_path, qtbot):
    from scalesieve.gui.csv_import_dialog import CsvImportDialog

    # A table the reader takes as headerless: the first row is data, no time column.
    p = tmp_path / "plain.txt"
    rows = [[0.5 * i, (-1) ** i * 0.25 * i] for i in range(200)]
    p.write_text("\n".join(f"{a}\t{b}" for a, b in rows) + "\n")
    dlg = CsvImportDialog(str(p))
    qtbot.addWidget(dlg)
    ok = dlg.buttons.buttons()[0]
    assert not ok.isEnabled() and "rate" in dlg.status.text()
    dlg.rate.setValue(250.0)
    assert ok.isEnabled()
    rec = dlg.recording()
    # Reference: Python's csv module with a tab delimiter.
    with open(p, newline="") as fh:
        ref = np.array([[float(c) for c in r] for r in csv.reader(fh, delimiter="\t")])
    np.testing.assert_array_equal(rec.samples, ref)
    assert rec.rate == 250.0
    # By hand: the first column is time (in s, 0.5 s steps -> 2 Hz).
    dlg.rate.setValue(0.0)
    dlg.time.setCurrentIndex(dlg.time.findData("yes"))
    assert ok.isEnabled() and "2 Hz" in dlg.status.text()
    rec = dlg.recording()
    assert rec.rate == pytest.approx(2.0) and rec.channels == 1
    np.testing.assert_array_equal(rec.samples[:, 0], ref[:, 1])
