"""Listening, the export dialog, About: the parts around the panes.

References: NumPy's own ``abs().max()`` for the level a text recording is
played at; soundfile's ``available_subtypes`` for the formats the export
dialog may offer.
"""

import numpy as np
import pytest
import soundfile as sf
from PySide6.QtWidgets import QMessageBox

from sample_files import open_sample


def test_first_playback_asks_for_care_once_then_plays_the_visible_span(window, monkeypatch):
    from scalesieve.gui import main_window, playback

    played = []
    asked = []
    monkeypatch.setattr(playback, "output_status", lambda: (True, "test output"))
    monkeypatch.setattr(main_window.playback, "output_status", lambda: (True, "test output"))
    monkeypatch.setattr(window._player, "play", lambda x, rate: played.append((x, rate)))
    monkeypatch.setattr(QMessageBox, "warning",
                        lambda *a, **k: asked.append(a[2]) or QMessageBox.StandardButton.Ok)
    m = open_sample(window, "pump_bearing.wav")
    window.time_axis.set_range(1.0, 1.5)
    window.play("original")
    window.play("removed")
    assert len(asked) == 1 and "loud" in asked[0]
    x, rate = played[0]
    assert rate == 25600.0 and x.dtype == np.float32
    np.testing.assert_array_equal(x, m.original(0)[25600:38401].astype(np.float32))
    assert not played[1][0].any()              # nothing removed yet


def test_text_recordings_are_played_at_a_moderate_level():
    from scalesieve.gui.playback import TEXT_PEAK, prepare

    x = np.array([120.0, -300.0, 50.0])          # microstrain, not audio units
    y = prepare(x, is_audio=False)
    assert np.abs(y).max() == pytest.approx(TEXT_PEAK)
    z = prepare(np.array([0.2, -1.7]), is_audio=True)
    assert z.tolist() == pytest.approx([0.2, -1.0])   # audio keeps its level, clipped


def test_export_dialog_offers_formats_soundfile_can_write(qtbot, tmp_path):
    from scalesieve.gui.export_dialog import SUBTYPES, ExportDialog

    dlg = ExportDialog("/data/pump.wav", str(tmp_path), "removed")
    qtbot.addWidget(dlg)
    path, what, sub = dlg.values()
    assert what == "removed" and path.endswith("pump-removed.wav") and sub is None
    for fmt, container in (("wav", "WAV"), ("flac", "FLAC")):
        for sub, _ in SUBTYPES[fmt]:
            if sub is not None:
                assert sub in sf.available_subtypes(container)
    dlg.format.setCurrentIndex(dlg.format.findData("csv"))
    assert dlg.values()[0].endswith("pump-removed.csv")


def test_about_names_versions_and_cautions(qtbot):
    from scalesieve import __version__
    from scalesieve.gui.about_dialog import CAUTIONS, AboutDialog, versions

    names = dict(versions())
    assert names["Scalesieve"] == __version__ and "PyWavelets" in names and "Qt" in names
    text = " ".join(CAUTIONS).lower()
    for word in ("hearing", "research", "diagnosis", "standards", "qualified"):
        assert word in text
    dlg = AboutDialog()
    qtbot.addWidget(dlg)
    assert dlg.windowTitle() == "About Scalesieve"


def test_resources_are_found_from_the_source_tree():
    from scalesieve.gui.resource_files import PERCEPTUAL_MAPS, palette, resource_dir, style_sheet

    assert resource_dir() is not None and resource_dir().endswith("resources")
    assert "QMainWindow" in style_sheet()
    assert all(m["name"] in PERCEPTUAL_MAPS for m in palette()["colour_maps"])
