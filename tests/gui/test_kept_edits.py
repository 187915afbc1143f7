"""Kept edits in the window (pytest-qt, a temporary user data folder).

A failed or partial restore loses nothing; a normal close, a saved recipe or
an export leaves no "did not close normally" offer; kept sessions are listed
under File and open as a recipe.  The recordings are the bundled demo and
shorter cuts of it, written with soundfile; the recipes written are read
back with ``json`` and ``scalesieve.recipe.load``.
"""

from __future__ import annotations

import json
import os
import shutil

import pytest
import soundfile as sf

from scalesieve.core.transforms import TransformSpec
from scalesieve.recipe import Edit, Recipe

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
LAB = os.path.join(ROOT, "sample_signals", "pump_bearing.wav")     # 4.0 s at 25.6 kHz
EDITS = (Edit("gain", levels=(1,), gain=0.0),
         Edit("region", levels=(1, 2), start_s=1.0, stop_s=2.0, gain=0.0),
         Edit("threshold", levels="details", rule="universal"))


@pytest.fixture
def data_dir(tmp_path, monkeypatch):
    d = tmp_path / "userdata"
    monkeypatch.setenv("SCALESIEVE_DATA_DIR", str(d))
    return d


def _window(qtbot, tmp_path, name="s.ini"):
    from scalesieve.gui import window_settings as ws
    from scalesieve.gui.app import make_application
    from scalesieve.gui.main_window import MainWindow

    app = make_application()
    app.setProperty("scalesieve_quiet_errors", True)
    w = MainWindow(ws.open_settings(str(tmp_path / name)))
    qtbot.addWidget(w)
    w.show()
    return w


def _open(window, path, answers, told=None):
    from scalesieve.gui.session_keeper import SessionKeeper

    seen = []

    def ask(info, parent):
        seen.append(info)
        return answers.pop(0)

    keeper = SessionKeeper(window, ask=ask, tell=(told.append if told is not None else None))
    window.open_path(str(path))
    assert window.adapter.wait_idle(60) is None
    _wait_for_restore_check(keeper)
    return keeper, seen


def _wait_for_restore_check(keeper, timeout_s=60.0):
    # the saved edits are looked for in a worker thread; the offer comes after
    import time

    from PySide6.QtTest import QTest

    deadline = time.monotonic() + timeout_s
    while keeper.checking and time.monotonic() < deadline:
        QTest.qWait(10)
    assert not keeper.checking


def _kept():
    from scalesieve import autosave

    return [s for s in autosave.list_sessions() if s["kept"]]


def test_a_restore_onto_a_shorter_recording_applies_what_fits_and_keeps_all(
        qtbot, tmp_path, data_dir):
    from scalesieve import autosave

    rec_path = tmp_path / "pump.wav"
    shutil.copy(LAB, rec_path)
    autosave.save_session(str(rec_path), Recipe(TransformSpec("dwt", "db4", 6), EDITS), {})
    x, rate = sf.read(LAB)
    sf.write(str(rec_path), x[: int(0.8 * rate)], rate, subtype="PCM_16")   # now 0.8 s long
    w = _window(qtbot, tmp_path)
    told = []
    keeper, seen = _open(w, rec_path, ["restore"], told)
    assert len(seen) == 1 and seen[0].changed
    qtbot.waitUntil(lambda: len(w.adapter.edits) == 2, timeout=20000)
    assert w.adapter.wait_idle(60) is None
    assert tuple(w.adapter.edits) == (EDITS[0], EDITS[2])
    assert told and "2 of 3 edits applied" in told[0]
    assert "edit 2 (region)" in told[0] and "not inside the recording" in told[0]
    qtbot.wait(2500)      # the old fault rewrote the session about 2 s later
    [kept] = _kept()
    with open(kept["file"], encoding="utf-8") as fh:
        assert len(json.load(fh)["recipe"]["edits"]) == 3        # all three, whole
    w.close()


def test_a_normal_close_is_not_offered_as_a_crash(qtbot, tmp_path, data_dir):
    from scalesieve import autosave

    rec_path = tmp_path / "pump.wav"
    shutil.copy(LAB, rec_path)
    w = _window(qtbot, tmp_path)
    _open(w, rec_path, [])
    w.adapter.add_edit(EDITS[0])
    assert autosave.pending_restore(str(rec_path)) is not None    # kept while open
    w.close()
    assert autosave.pending_restore(str(rec_path)) is None
    [kept] = _kept()                                  # unsaved: kept, listed, not offered
    assert kept["edits"] == 1
    w2 = _window(qtbot, tmp_path, "s2.ini")
    _, seen = _open(w2, rec_path, [])
    assert seen == []
    w2.close()


def test_saving_the_recipe_or_exporting_clears_the_pending_session(qtbot, tmp_path, data_dir):
    from scalesieve import autosave
    from scalesieve.recipe import load

    rec_path = tmp_path / "pump.wav"
    shutil.copy(LAB, rec_path)
    w = _window(qtbot, tmp_path)
    _open(w, rec_path, [])
    w.adapter.add_edit(EDITS[0])
    assert autosave.pending_restore(str(rec_path)) is not None
    assert w.save_recipe(str(tmp_path / "r.json"))
    assert autosave.pending_restore(str(rec_path)) is None
    assert load(str(tmp_path / "r.json")).edits == (EDITS[0],)
    w.adapter.add_edit(EDITS[2])                       # a new, unsaved edit: pending again
    assert w.adapter.wait_idle(60) is None
    assert autosave.pending_restore(str(rec_path)).edit_count == 2
    assert w.export_signal(str(tmp_path / "cleaned.wav")) is not None
    assert autosave.pending_restore(str(rec_path)) is None
    w.close()                                          # everything was exported: nothing kept
    assert autosave.list_sessions() == []


def test_kept_for_later_is_listed_under_file_and_opens_as_a_recipe(qtbot, tmp_path, data_dir):
    from scalesieve import autosave
    from scalesieve.recipe import load

    rec_path = tmp_path / "pump.wav"
    shutil.copy(LAB, rec_path)
    saved = (EDITS[0], EDITS[2])
    autosave.save_session(str(rec_path), Recipe(TransformSpec("dwt", "db4", 6), saved), {})
    w = _window(qtbot, tmp_path)
    _open(w, rec_path, ["later"])
    assert w.adapter.edits == ()
    file_menu = w.menuBar().actions()[0].menu()
    assert w.kept_menu.menuAction() in file_menu.actions()
    w.kept_menu.refill()
    labels = [a.text() for a in w.kept_menu.actions()]
    assert any(t.startswith("pump.wav — 2 edits — ") for t in labels), labels
    [kept] = _kept()
    applied, refused = w.kept_menu.open_as_recipe(kept["file"])
    assert refused == [] and applied == saved
    qtbot.waitUntil(lambda: len(w.adapter.edits) == 2, timeout=20000)
    assert tuple(w.adapter.edits) == saved
    out = w.kept_menu.save_as_recipe(kept["file"], str(tmp_path / "kept-recipe.json"))
    assert load(out).edits == saved
    assert _kept()                                     # opening it did not remove it
    assert w.kept_menu.remove(kept["file"], ask=False)
    assert _kept() == []
    w.close()
