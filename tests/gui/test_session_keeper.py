"""No lost work: edits are kept after each change and offered back on reopening."""

import json
import os
import shutil

import numpy as np
import pytest
import soundfile as sf

from scalesieve.recipe import Edit

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
LAB = os.path.join(ROOT, "sample_signals", "pump_bearing.wav")


@pytest.fixture
def data_dir(tmp_path, monkeypatch):
    d = tmp_path / "userdata"
    monkeypatch.setenv("SCALESIEVE_DATA_DIR", str(d))
    return d


def _open(window, path, answers):
    from scalesieve.gui.session_keeper import SessionKeeper

    seen = []

    def ask(info, parent):
        seen.append(info)
        return answers.pop(0)

    keeper = SessionKeeper(window, ask=ask)
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


def test_edits_saved_then_offered_back(window, qtbot, tmp_path, data_dir):
    from scalesieve import autosave

    rec_path = tmp_path / "pump.wav"
    shutil.copy(LAB, rec_path)
    keeper, seen = _open(window, rec_path, [])
    assert seen == []
    window.adapter.add_edit(Edit("gain", levels=(1,), gain=0.0))
    qtbot.waitUntil(lambda: os.path.exists(autosave.session_file(str(rec_path))), timeout=5000)
    keeper.save_now()
    info = autosave.pending_restore(str(rec_path))
    assert info is not None and info.edit_count == 1 and not info.changed
    window.close()


def test_restore_after_reopening(qtbot, qapp, tmp_path, data_dir):
    from scalesieve import autosave
    from scalesieve.gui import window_settings as ws
    from scalesieve.gui.main_window import MainWindow

    rec_path = tmp_path / "pump.wav"
    shutil.copy(LAB, rec_path)
    edits = (Edit("gain", levels=(1,), gain=0.0),
             Edit("threshold", levels="details", rule="universal"))
    from scalesieve.core.transforms import TransformSpec
    from scalesieve.recipe import Recipe

    autosave.save_session(str(rec_path), Recipe(TransformSpec("dwt", "db4", 6), edits).to_json(),
                          {"channel": 0})
    w = MainWindow(ws.open_settings(str(tmp_path / "s.ini")))
    qtbot.addWidget(w)
    w.show()
    keeper, seen = _open(w, rec_path, ["restore"])
    assert len(seen) == 1 and not seen[0].changed
    qtbot.waitUntil(lambda: w.adapter.model is not None and len(w.adapter.edits) == 2,
                    timeout=20000)
    assert w.adapter.wait_idle(60) is None
    assert tuple(w.adapter.edits) == edits
    assert w.adapter.model.spec.level == 6
    w.close()


def test_changed_recording_is_told(qtbot, qapp, tmp_path, data_dir):
    from scalesieve import autosave
    from scalesieve.gui import window_settings as ws
    from scalesieve.gui.main_window import MainWindow
    from scalesieve.recipe import Recipe

    rec_path = tmp_path / "pump.wav"
    shutil.copy(LAB, rec_path)
    autosave.save_session(str(rec_path),
                          Recipe(None, (Edit("gain", levels=(2,), gain=0.0),)).to_json(), {})
    x, rate = sf.read(str(rec_path))
    sf.write(str(rec_path), np.flip(x), rate, subtype="PCM_16")      # the file changed on disk
    w = MainWindow(ws.open_settings(str(tmp_path / "s.ini")))
    qtbot.addWidget(w)
    w.show()
    keeper, seen = _open(w, rec_path, ["discard"])
    assert len(seen) == 1 and seen[0].changed and seen[0].change_reason
    assert autosave.pending_restore(str(rec_path)) is None      # discarded
    w.close()


def test_batch_command_dialog(qtbot, tmp_path):
    from scalesieve.gui.batch_dialog import BatchCommandDialog, command_for

    cmd = command_for(str(tmp_path / "r.json"), str(tmp_path / "pump.wav"), workers=2)
    assert cmd.startswith("scalesieve batch") and "r.json" in cmd and "--workers 2" in cmd
    dlg = BatchCommandDialog(cmd, str(tmp_path / "r.json"))
    qtbot.addWidget(dlg)
    dlg.copy_command()
    from PySide6.QtGui import QGuiApplication

    assert QGuiApplication.clipboard().text() == cmd


def test_window_shows_batch_command_for_saved_recipe(window, tmp_path):
    # The command line shown replays the saved recipe with `scalesieve batch`.
    import shlex

    from scalesieve.recipe import load

    rec_path = tmp_path / "pump.wav"
    shutil.copy(LAB, rec_path)
    window.open_path(str(rec_path))
    assert window.adapter.wait_idle(60) is None
    window.adapter.add_edit(Edit("gain", levels=(1,), gain=0.0))
    rp = tmp_path / "r.json"
    assert window.save_recipe(str(rp))
    dlg = window.show_batch_command(str(rp))
    words = shlex.split(dlg.text.toPlainText())
    assert words[:2] == ["scalesieve", "batch"]
    assert words[words.index("--recipe") + 1] == str(rp)
    assert words[words.index("-o") + 1].startswith(str(tmp_path))
    assert load(str(rp)).edits == (Edit("gain", levels=(1,), gain=0.0),)
    dlg.close()


def test_recording_is_hashed_off_the_window_thread_and_offered_after(qtbot, qapp, tmp_path,
                                                                     data_dir, monkeypatch):
    import threading

    from scalesieve import autosave
    from scalesieve.core.transforms import TransformSpec
    from scalesieve.gui import window_settings as ws
    from scalesieve.gui.main_window import MainWindow
    from scalesieve.gui.session_keeper import SessionKeeper
    from scalesieve.recipe import Recipe

    rec_path = tmp_path / "pump.wav"
    shutil.copy(LAB, rec_path)
    saved = (Edit("gain", levels=(1,), gain=0.0),)
    autosave.save_session(str(rec_path), Recipe(TransformSpec("dwt", "db4", 6), saved).to_json(),
                          {})
    real = autosave.fingerprint
    hashed_on, gate = [], threading.Event()

    def slow_fingerprint(path, **kw):
        hashed_on.append(threading.current_thread() is threading.main_thread())
        gate.wait(30)            # a large recording: the hash takes a while
        return real(path, **kw)

    monkeypatch.setattr(autosave, "fingerprint", slow_fingerprint)
    w = MainWindow(ws.open_settings(str(tmp_path / "s.ini")))
    qtbot.addWidget(w)
    w.show()
    seen = []
    keeper = SessionKeeper(w, ask=lambda info, parent: seen.append(info) or "later")
    w.open_path(str(rec_path))
    assert w.adapter.wait_idle(60) is None
    qtbot.waitUntil(lambda: bool(hashed_on), timeout=10000)
    # the window goes on while the hash runs: an edit is taken, the offer waits
    assert keeper.checking and seen == []
    w.adapter.add_edit(Edit("gain", levels=(2,), gain=0.5))
    keeper.save_now()
    # ... and the saved edits are not overwritten before they are offered
    with open(autosave.session_file(str(rec_path)), encoding="utf-8") as fh:
        assert json.load(fh)["recipe"]["edits"] == [e.to_json() for e in saved]
    gate.set()
    qtbot.waitUntil(lambda: not keeper.checking, timeout=20000)
    assert hashed_on and not any(hashed_on)          # never on the window's thread
    assert len(seen) == 1 and seen[0].edit_count == 1 and not seen[0].changed
    # kept for later; the edit made meanwhile is saved once the answer is in
    assert len([s for s in autosave.list_sessions() if s["kept"]]) == 1
    with open(autosave.session_file(str(rec_path)), encoding="utf-8") as fh:
        assert json.load(fh)["recipe"]["edits"] == [e.to_json() for e in w.adapter.edits]
    w.close()


@pytest.mark.parametrize("where", ["look-up", "after the restore"])
def test_a_restore_onto_a_resized_recording_hashes_it_off_the_window_thread(
        qtbot, qapp, tmp_path, data_dir, monkeypatch, where):
    # a changed size is told without hashing (autosave._compare); the restored edits then
    # take the file's new fingerprint, which is made in the worker thread, never here
    import threading

    from scalesieve import autosave
    from scalesieve.gui import session_keeper as sk
    from scalesieve.gui import window_settings as ws
    from scalesieve.gui.main_window import MainWindow
    from scalesieve.gui.session_keeper import SessionKeeper
    from scalesieve.recipe import Recipe

    rec_path = tmp_path / "pump.wav"
    shutil.copy(LAB, rec_path)
    saved = (Edit("gain", levels=(2,), gain=0.0),)
    autosave.save_session(str(rec_path), Recipe(None, saved).to_json(), {})
    x, rate = sf.read(str(rec_path))
    sf.write(str(rec_path), x[: x.shape[0] // 2], rate, subtype="PCM_16")   # now shorter
    new_size = os.path.getsize(rec_path)
    real = autosave.fingerprint
    hashed_on = []

    def watched(path, **kw):
        hashed_on.append(threading.current_thread() is threading.main_thread())
        return real(path, **kw)

    monkeypatch.setattr(autosave, "fingerprint", watched)
    if where == "after the restore":
        # the look-up could not hash it (say the file was busy then): the save hashes it
        look = sk._look_for_saved_edits
        monkeypatch.setattr(sk, "_look_for_saved_edits",
                            lambda path: (look(path)[0], None, None))
    w = MainWindow(ws.open_settings(str(tmp_path / "s.ini")))
    qtbot.addWidget(w)
    w.show()
    seen = []
    keeper = SessionKeeper(w, ask=lambda info, parent: seen.append(info) or "restore")
    w.open_path(str(rec_path))
    assert w.adapter.wait_idle(60) is None
    qtbot.waitUntil(lambda: bool(seen), timeout=20000)
    assert seen[0].changed and "size changed" in seen[0].change_reason
    assert seen[0].current is None                  # compared without hashing
    qtbot.waitUntil(lambda: tuple(w.adapter.edits) == saved and not keeper.checking,
                    timeout=20000)
    assert w.adapter.wait_idle(60) is None
    qtbot.waitUntil(lambda: not keeper.checking, timeout=20000)
    assert hashed_on and not any(hashed_on)          # every hash in the worker
    with open(autosave.session_file(str(rec_path)), encoding="utf-8") as fh:
        session = json.load(fh)
    assert session["recipe"]["edits"] == [e.to_json() for e in saved]
    assert session["recording"]["fingerprint"]["size"] == new_size
    # and opened again, the file is the one the edits were restored onto
    again = autosave.pending_restore(str(rec_path))
    assert again is not None and not again.changed
    w.close()
