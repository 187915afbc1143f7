"""Packet bands in the window, the Impulse map and the Envelope spectrum pane.

References: PyWavelets' WaveletPacket reconstruction for the edited signal,
Python's csv module for the exported spectrum, and the invented fan recording's
facts in sample_signals/README.md (resonance 5200 Hz, BPFO 119.405 Hz).
"""

import csv
import math

import numpy as np
import pytest
import pywt
from PySide6.QtWidgets import QApplication

from sample_files import sample
from scalesieve.core.transforms import TransformSpec

FAN = "fan_bearing.wav"
BPFO_HZ = 10 * 29.5 / 2 * (1 - 8.0 / 42.0)     # Randall & Antoni 2011, eq. 2


def _open_packet(window, level=3):
    from scalesieve import api

    rec = api.load(sample(FAN))
    window.open_recording(rec, TransformSpec("packet", "db4", level, "symmetric"))
    assert window.adapter.wait_idle(60) is None
    return window.adapter.model


def test_a_packet_band_gain_in_the_window_matches_pywavelets(window, qtbot):
    m = _open_packet(window)
    assert [m.band_name(k) for k in window.scale_map.headers] == [f"w3.{k}" for k in range(8)]
    head = window.scale_map.headers[m.band_keys[5]]      # the row header's gain field
    head.gain.setValue(-6.0)
    assert window.adapter.wait_idle(60) is None
    assert [e.to_json() for e in m.edits] == [{"op": "gain", "bands": ["w3.5"],
                                              "gain": pytest.approx(10 ** (-6 / 20))}]
    x = m.original(0)
    tree = pywt.WaveletPacket(x, "db4", "symmetric", maxlevel=3)
    nodes = tree.get_level(3, "freq")
    nodes[5].data = nodes[5].data * 10 ** (-6 / 20)
    ref = tree.reconstruct(update=False)[:x.shape[0]]
    np.testing.assert_allclose(m.cleaned(0), ref, atol=1e-10)
    window.adapter.undo()
    assert window.adapter.wait_idle(60) is None
    np.testing.assert_allclose(m.cleaned(0), x, atol=1e-12)


def _drawn(qtbot, *panes):
    """Wait until the panes' worker threads have delivered (tables and spectra)."""
    qtbot.waitUntil(lambda: not any(p.busy for p in panes), timeout=60000)


def test_impulse_map_marks_the_resonance_band_and_a_cell_chooses_the_band(window, qtbot,
                                                                           tmp_path):
    m = _open_packet(window)
    dock = window.impacts_dock
    dock.show()
    QApplication.processEvents()
    imap, env = dock.impulse_map, dock.envelope
    _drawn(qtbot, imap, env)
    best = imap.table["best"]
    assert best["low_hz"] <= 5200.0 <= best["high_hz"]      # README: resonance 5200 Hz
    assert env.report["band"]["name"] == best["name"]
    assert abs(env.report["peaks"][0]["hz"] - BPFO_HZ) < 0.5
    # choosing another cell demodulates that band
    imap.choose("w4.6")
    _drawn(qtbot, env)
    assert env.report["band"]["name"] == "w4.6" and env.report["band"]["low_hz"] == 4800.0
    assert "level 4" in window.statusBar().currentMessage()     # the window shows level 3
    assert window.scale_map.selected_rows == []                # not a band of level 3
    imap.choose("w3.3")
    _drawn(qtbot, env)
    assert "selected in the Scale map" in window.statusBar().currentMessage()
    # the band is selected in the row headers, so the edit buttons act on it
    assert [m.band_name(k) for k in window.scale_map.selected_rows] == ["w3.3"]
    assert window.scale_map.headers[window.scale_map.selected_rows[0]].isVisible()
    env.set_bearing("10,8.0,42.0,0", 29.5)      # lines matched on the spectrum made
    assert not env.busy                         # no new spectrum for new lines
    bpfo = [ln for ln in env.report["lines"] if ln["name"] == "bpfo" and ln["harmonic"] == 1
            and not ln["sideband"]][0]
    assert abs(bpfo["found_hz"] - BPFO_HZ) < 0.5
    assert "BPFO" in env.readout.text() and len(env.markers) == len(env.report["lines"])
    out = tmp_path / "spec.csv"
    env.export_csv(str(out))
    with open(out, newline="") as fh:
        rows = list(csv.reader(fh))
    assert rows[0] == ["hz", "amplitude"] and len(rows) - 1 == env.report["freqs"].shape[0]
    pic = tmp_path / "spec.png"
    env.export_picture(str(pic))
    assert pic.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    # one caution under both panes (the same words for both figures)
    assert "qualified people" in dock.caution.text() and dock.caution.isVisible()


def test_cell_under_a_point():
    from scalesieve.gui.impulse_map import cell_at

    # depth 3 of a 16 kHz recording: bands 1 kHz wide, row 2 (from the top) is depth 3
    assert cell_at(5500.0, 2.5, 4, 16000.0) == (3, 5)
    assert cell_at(9000.0, 0.1, 4, 16000.0) is None
    assert math.isclose(16000.0 / 2 ** 4, 1000.0)


def test_the_window_stays_responsive_while_the_impacts_panes_work(window, qtbot):
    """The kurtosis table and the envelope spectrum are worked out off the window's thread.

    A timer of the window's event loop must fire while the workers run (no timing
    assertion beyond that); the figures that come are those of the core functions.
    """
    from scalesieve.core import impulsive_bands as ib
    from scalesieve.core.recording import Recording

    rng = np.random.default_rng(15)
    # long enough that the table takes a while even on a fast machine (2 M samples)
    x = rng.standard_normal(1 << 21)
    x[::4096] += 40.0                              # impacts, so some band stands out
    rec = Recording(x[:, None], 48000.0, ["accel"], "")
    window.open_recording(rec, TransformSpec("dwt", "db4", 4, "symmetric"))
    assert window.adapter.wait_idle(120) is None
    dock = window.impacts_dock
    imap, env = dock.impulse_map, dock.envelope
    ticks = {"while_busy": 0}

    def tick():
        if imap.busy or env.busy:
            ticks["while_busy"] += 1

    from PySide6.QtCore import QTimer

    timer = QTimer()
    timer.setInterval(5)
    timer.timeout.connect(tick)
    timer.start()
    dock.show()
    assert imap.busy and env.busy                  # asked of the workers, not done here
    assert imap.working.isVisible() and env.working.isVisible()
    _drawn(qtbot, imap, env)
    timer.stop()
    assert ticks["while_busy"] > 0
    assert not imap.working.isVisible() and not env.working.isVisible()
    # the table drawn is the core's (itself checked against scipy.stats in tests/core)
    ref = ib.table(x, 48000.0, "db4", "symmetric", ib.DEFAULT_DEPTH)
    assert len(imap.table["levels"]) == ib.DEFAULT_DEPTH
    assert imap.table["best"]["name"] == ref["best"]["name"]
    assert env.report["band"]["name"] == ref["best"]["name"]


def test_rapid_band_choices_end_on_the_latest(window, qtbot):
    """Latest wins: of several bands chosen in a row the spectrum shown is the last one's."""
    _open_packet(window)
    dock = window.impacts_dock
    dock.show()
    imap, env = dock.impulse_map, dock.envelope
    _drawn(qtbot, imap, env)
    for name in ("w2.1", "w5.3", "w4.6", "w3.5"):
        imap.choose(name)
    _drawn(qtbot, env)
    assert env.report["band"]["name"] == "w3.5"
    # packet band K of depth J spans K..K+1 times fs / 2^(J+1) (common practice)
    assert env.report["band"]["low_hz"] == 5 * window.adapter.recording.rate / 2 ** 4


def test_a_snapshot_waits_for_the_impacts_figures(window, tmp_path):
    """``--snapshot --impacts`` draws the figures, not the moving bars."""
    _open_packet(window)
    dock = window.impacts_dock
    dock.show()                                  # asks the workers; nothing waited for yet
    out = tmp_path / "look.png"
    window.snapshot(str(out))
    imap, env = dock.impulse_map, dock.envelope
    assert not imap.busy and not env.busy
    assert imap.table is not None and env.report is not None
    assert not imap.working.isVisible() and not env.working.isVisible()
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"     # the PNG signature


def test_impacts_dock_on_a_1280_wide_window_is_not_cramped(window, qtbot):
    # the panes keep their minimum sizes, and no readout paints over the plot above it
    # (test_window_fits.py: the whole window with the dock open fits 1280×800)
    from scalesieve import api

    window.resize(1280, 800)
    window.open_recording(api.load(sample(FAN)), TransformSpec("dwt", "db4", None, "symmetric"))
    assert window.adapter.wait_idle(60) is None
    dock = window.impacts_dock
    dock.show()
    QApplication.processEvents()
    imap, env = dock.impulse_map, dock.envelope
    _drawn(qtbot, imap, env)
    env.set_bearing("10,8.0,42.0,0", 29.5)
    QApplication.processEvents()
    assert imap.width() >= 380 and imap.plot.height() >= 100 and env.plot.height() >= 100
    for pane in (imap, env):
        assert pane.readout.geometry().top() >= pane.plot.geometry().bottom()
        need = pane.readout.heightForWidth(pane.readout.width())
        assert pane.readout.height() >= min(need, 2 * pane.readout.fontMetrics().lineSpacing())
    # the dock opened with a real share of the height, not its bare minimum
    assert dock.height() >= dock.minimumSizeHint().height()


def test_impulse_map_readout_shows_the_figure_the_map_shows(window, qtbot, tmp_path):
    # the cell's colour is the band's kurtosis of all coefficients (table_image); the
    # readout prints that figure, and the interior one the choice uses beside it
    import soundfile as sf
    from scipy import stats

    from scalesieve import api
    from scalesieve.gui.impulse_map import table_image

    _open_packet(window)
    dock = window.impacts_dock
    dock.show()
    QApplication.processEvents()
    imap = dock.impulse_map
    _drawn(qtbot, imap, dock.envelope)
    best = imap.table["best"]
    img = table_image(imap.table)
    width = 2 ** (len(imap.table["levels"]) - best["level"])
    index = int(best["name"].split(".")[1])
    assert img[best["level"] - 1, index * width] == best["kurtosis"]
    text = imap.readout.text()
    assert f"kurtosis {best['kurtosis']:.2f} on the map" in text
    assert f"{best['interior_kurtosis']:.2f} inside its edges" in text
    # Gaussian noise: the map's best band is no answer (scipy.stats.kurtosistest on its
    # interior coefficients is far from significant), and the readout says so
    path = tmp_path / "hiss.wav"
    sf.write(path, 0.1 * np.random.default_rng(3).standard_normal(65536), 16000,
             subtype="FLOAT")
    window.open_recording(api.load(str(path)))
    assert window.adapter.wait_idle(60) is None
    QApplication.processEvents()
    _drawn(qtbot, imap, dock.envelope)
    best = imap.table["best"]
    assert best is not None
    assert imap.readout.text().startswith("No band stands out as impulsive")
    x = window.adapter.recording.samples[:, 0]
    wp = pywt.WaveletPacket(x, "db4", "symmetric", maxlevel=best["level"])
    node = wp[best["path"]].data
    from scalesieve.core import band_choice as bc

    e, r = bc.dwt_edges(x.shape[0], 8, best["level"])[best["level"] - 1]
    p = stats.kurtosistest(node[e:node.shape[0] - r], alternative="greater").pvalue
    assert p > 0.01 / sum(len(lv["bands"]) for lv in imap.table["levels"])


def test_bearing_line_labels_do_not_touch_at_1280_by_800(window, qtbot):
    """The labels as pyqtgraph draws them (their scene rectangles, less the text
    document's 4 px margin: Qt's QTextDocument default) keep at least 4 px apart in the
    window at 1280×800, for the fan bearing of sample_signals/README.md."""
    window.resize(1280, 800)
    _open_packet(window)
    dock = window.impacts_dock
    dock.show()
    QApplication.processEvents()
    env = dock.envelope
    _drawn(qtbot, dock.impulse_map, env)
    env.set_bearing("10,8.0,42.0,0", 29.5)
    QApplication.processEvents()
    boxes = []
    for m in env.markers:
        label = getattr(m, "label", None)
        if label is None or not label.isVisible() or not label.toPlainText():
            continue
        margin = label.textItem.document().documentMargin()
        r = label.mapRectToScene(label.textItem.mapRectToParent(
            label.textItem.boundingRect().adjusted(margin, margin, -margin, -margin)))
        boxes.append((label.toPlainText(), r))
    assert len(boxes) >= 4            # the first harmonics at least
    for i, (t1, r1) in enumerate(boxes):
        for t2, r2 in boxes[i + 1:]:
            # "touch": closer than 4 px side by side, or overlapping rows
            assert not r1.adjusted(-4, 0, 4, 0).intersects(r2), (t1, t2, r1, r2)
