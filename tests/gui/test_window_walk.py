"""What a walk through the window at 1280×800 found cramped, cut or unnamed, held fixed.

References: the invented sample recordings (sample_signals/README.md) for the
channel names; the rest are layout facts measured with Qt's own font metrics.
"""

import os

from PySide6.QtWidgets import QApplication

from sample_files import sample


def test_the_channel_list_shows_a_whole_channel_name(window):
    from scalesieve import api

    window.resize(1280, 800)
    window.open_recording(api.load(sample("lab_trace_baseline.csv")))
    assert window.adapter.wait_idle(60) is None
    QApplication.processEvents()
    box = window.channel_box
    text = box.currentText()
    assert text.endswith("signal_mV")
    # the text area of a combo box is its width less the arrow (about 30 px here)
    assert box.fontMetrics().horizontalAdvance(text) <= box.width() - 24


def test_the_wavelet_picture_says_what_it_shows():
    from scalesieve.gui.transform_line import WaveletShape

    shape = WaveletShape()
    shape.show_wavelet("sym8")
    title = shape.getPlotItem().titleLabel.text
    assert "ψ" in title and "sym8" in title


def test_export_dialog_has_room_for_a_folder_and_a_name(qtbot, tmp_path):
    from scalesieve.gui.export_dialog import ExportDialog

    dlg = ExportDialog(str(tmp_path / "pump_bearing.wav"), str(tmp_path))
    qtbot.addWidget(dlg)
    dlg.show()
    QApplication.processEvents()
    name = os.path.join("measurements", "pump_bearing-cleaned.wav")
    assert dlg.path.fontMetrics().horizontalAdvance(name) < dlg.path.width()
    assert dlg.path.toolTip() == dlg.path.text()


def test_restore_prompt_lists_every_edit_whole(qtbot, tmp_path, monkeypatch):
    import shutil

    from scalesieve import autosave
    from scalesieve.gui.restore_prompt import RestorePrompt
    from scalesieve.recipe import Edit, Recipe

    monkeypatch.setenv("SCALESIEVE_DATA_DIR", str(tmp_path / "data"))
    rec = tmp_path / "pump.wav"
    shutil.copy(sample("pump_bearing.wav"), rec)
    edits = (Edit("threshold", levels="details", rule="universal", shape="soft"),
             Edit("region", levels=(1, 2), start_s=1.2, stop_s=1.25, gain=0.0))
    autosave.save_session(str(rec), Recipe(None, edits).to_json(), {})
    prompt = RestorePrompt(autosave.pending_restore(str(rec)))
    qtbot.addWidget(prompt)
    prompt.show()
    QApplication.processEvents()
    listed = prompt.edits
    assert not listed.horizontalScrollBar().isVisible()
    for i in range(listed.count()):
        item = listed.item(i)
        assert item.toolTip() == item.text()
        rect = listed.visualItemRect(item)
        assert rect.right() <= listed.viewport().width()
    # the three answers side by side, none cut
    for b in (prompt.restore_button, prompt.discard_button, prompt.later_button):
        assert b.width() >= b.sizeHint().width()


def test_envelope_readout_names_each_bearing_line_once(window, qtbot):
    # Randall & Antoni 2011, eqs. 1-4, for the fan's geometry (sample_signals/README.md):
    # BPFO = n f_r / 2 (1 - d/D cos 0) = 119.40 Hz at 29.5 Hz shaft rate
    from scalesieve import api
    from scalesieve.core.transforms import TransformSpec

    window.resize(1280, 800)
    window.open_recording(api.load(sample("fan_bearing.wav")),
                          TransformSpec("dwt", "db4", None, "symmetric"))
    assert window.adapter.wait_idle(60) is None
    dock = window.impacts_dock
    dock.show()
    qtbot.waitUntil(lambda: not dock.envelope.busy, timeout=60000)
    dock.envelope.set_bearing("10,8.0,42.0,0", 29.5)
    text = dock.envelope.readout.text()
    assert "BPFO 119.40 Hz → peak" in text
    for family in ("FTF", "BPFO", "BPFI", "BSF"):
        assert text.count(family + " ") == 1, text
