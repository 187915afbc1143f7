"""Unexpected errors in the window become a dialog and a log; the program keeps running.

Runs offscreen (QT_QPA_PLATFORM=offscreen, set in tests/conftest.py) with
pytest-qt.  pytest-qt's own capture of exceptions in Qt callbacks is turned
off for the tests that need ours to see them.
"""

from __future__ import annotations

import math
import os
import threading

import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pytestqt")

from PySide6.QtCore import QTimer  # noqa: E402
from PySide6.QtWidgets import QWidget  # noqa: E402

from scalesieve import autosave  # noqa: E402
from scalesieve.core.transforms import TransformSpec  # noqa: E402
from scalesieve.errors import ScalesieveError  # noqa: E402
from scalesieve.gui import failure_dialog as fd  # noqa: E402
from scalesieve.gui import restore_prompt as rp  # noqa: E402
from scalesieve.recipe import Edit, Recipe  # noqa: E402


@pytest.fixture
def logs(tmp_path, monkeypatch):
    folder = tmp_path / "logs"
    monkeypatch.setenv(fd.LOG_DIR_ENV, str(folder))
    return folder


@pytest.fixture
def reporter(qapp, qtbot, logs):
    window = QWidget()
    qtbot.addWidget(window)
    r = fd.install_excepthook(qapp, lambda: window)
    yield r
    r.uninstall()
    if r.dialog is not None:
        r.dialog.close()


def _failing_slot():
    raise ValueError("band table index 7 out of range for a 6-level transform")


@pytest.mark.qt_no_exception_capture
def test_exception_in_a_slot_opens_the_dialog_writes_a_log_and_the_loop_runs_on(
        qtbot, reporter, logs):
    QTimer.singleShot(0, _failing_slot)
    qtbot.waitUntil(lambda: reporter.dialog is not None and reporter.dialog.isVisible(),
                    timeout=5000)
    d = reporter.dialog
    assert "ValueError" in d.message_label.text() and "still running" in d.message_label.text()
    log = reporter.last_log_path
    assert log and os.path.dirname(log) == str(logs) and os.path.exists(log)
    text = open(log, encoding="utf-8").read()
    assert "Traceback" in text and "_failing_slot" in text and "6-level transform" in text
    assert d.log_label.text() == f"Details saved to {log}"
    # The details are there but folded away until asked for.
    assert not d.details_edit.isVisible()
    d.details_button.click()
    assert d.details_edit.isVisible() and "_failing_slot" in d.details_edit.toPlainText()
    assert d.details_button.text() == "Hide details"
    # The event loop is still running: a later timer fires.
    fired = []
    QTimer.singleShot(0, lambda: fired.append(True))
    qtbot.waitUntil(lambda: bool(fired), timeout=5000)
    d.continue_button.click()
    assert not d.isVisible()


@pytest.mark.qt_no_exception_capture
def test_a_burst_of_failures_opens_one_dialog_and_logs_each(qtbot, reporter, logs):
    for _ in range(3):
        QTimer.singleShot(0, _failing_slot)
    qtbot.waitUntil(lambda: reporter.count == 3 and reporter.dialog is not None
                    and reporter.dialog.repeats == 2, timeout=5000)
    assert reporter.dialog.repeat_label.isVisible()
    assert "2 more errors" in reporter.dialog.repeat_label.text()
    assert len([n for n in os.listdir(logs) if n.endswith(".log")]) == 3


@pytest.mark.qt_no_exception_capture
def test_a_worker_thread_failure_is_shown_by_the_gui_thread(qtbot, reporter, logs):
    def work():
        raise RuntimeError("decomposition worker lost its recording")

    t = threading.Thread(target=work, name="decompose-worker")
    t.start()
    t.join()
    qtbot.waitUntil(lambda: reporter.dialog is not None and reporter.dialog.isVisible(),
                    timeout=5000)
    assert "RuntimeError" in reporter.dialog.message_label.text()
    assert "decompose-worker" in open(reporter.last_log_path, encoding="utf-8").read()


@pytest.mark.qt_no_exception_capture
def test_bad_input_that_escapes_gets_its_one_line_and_no_log(qtbot, reporter, logs):
    def slot():
        raise ScalesieveError("holds no data rows", source="rig_strain.csv")

    QTimer.singleShot(0, slot)
    qtbot.waitUntil(lambda: reporter.dialog is not None and reporter.dialog.isVisible(),
                    timeout=5000)
    assert reporter.dialog.message_label.text() == "rig_strain.csv: holds no data rows"
    assert not reporter.dialog.log_label.isVisible()
    assert not reporter.dialog.details_button.isEnabled()
    assert not logs.exists() or not os.listdir(logs)


@pytest.mark.qt_no_exception_capture
def test_quiet_mode_prints_one_line_instead_of_a_dialog(qtbot, qapp, reporter, capsys):
    qapp.setProperty("scalesieve_quiet_errors", True)
    try:
        QTimer.singleShot(0, _failing_slot)
        qtbot.waitUntil(lambda: qapp.property("scalesieve_last_error") is not None,
                        timeout=5000)
    finally:
        qapp.setProperty("scalesieve_quiet_errors", False)
    assert reporter.dialog is None
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("scalesieve: error: Something went wrong")
    qapp.setProperty("scalesieve_last_error", None)


def test_uninstall_restores_the_previous_hooks(qapp, logs):
    import sys

    before, before_t = sys.excepthook, threading.excepthook
    r = fd.install_excepthook(qapp)
    assert sys.excepthook == r.excepthook
    r.uninstall()
    assert sys.excepthook is before and threading.excepthook is before_t


def test_dialog_without_a_log_says_so_and_copies_details(qtbot, qapp):
    d = fd.FailureDialog("Something went wrong (OSError: …)", "Traceback …", None)
    qtbot.addWidget(d)
    assert "could not be saved" in d.log_label.text()
    d.copy_details()
    assert qapp.clipboard().text() == "Traceback …"


def test_old_logs_are_pruned(logs):
    os.makedirs(logs)
    for k in range(fd.KEEP_LOGS + 5):
        (logs / f"window-failure-20260101-000000-{k:06d}-1.log").write_text("x")
    assert fd.write_log("details")
    assert len(os.listdir(logs)) == fd.KEEP_LOGS


def test_default_log_folder_is_platformdirs_user_log_dir(monkeypatch):
    from platformdirs import user_log_dir

    monkeypatch.delenv(fd.LOG_DIR_ENV, raising=False)
    assert fd.log_dir() == user_log_dir("scalesieve", appauthor=False)


def test_short_message_is_one_short_line():
    msg = fd.short_message(KeyError("x\n" * 500))
    assert "\n" not in msg and len(msg) < 400


# ---------------------------------------------------------------- restore prompt

RECIPE = Recipe(TransformSpec("dwt", "db4", 5, "symmetric"),
                tuple(Edit("gain", levels=(k % 5 + 1,), gain=0.5) for k in range(15)))


@pytest.fixture
def saved(tmp_path, monkeypatch):
    monkeypatch.setenv(autosave.DATA_DIR_ENV, str(tmp_path / "data"))
    rec = tmp_path / "fan_vibration.wav"
    rec.write_bytes(b"RIFF" + bytes(500))
    autosave.save_session(rec, RECIPE, {"zoom_s": [0, 1]})
    return rec


def test_prompt_lists_the_edits_and_restores(qtbot, saved):
    info = autosave.pending_restore(saved)
    p = rp.RestorePrompt(info)
    qtbot.addWidget(p)
    p.show()
    assert "15 edits to fan_vibration.wav" in p.question.text()
    assert not p.warning.isVisible()
    assert p.edits.count() == 13 and p.edits.item(12).text() == "… and 3 more"
    # the window's words (docs/vocabulary.md: gain in dB, 20·log10 of the factor)
    db = 20 * math.log10(RECIPE.edits[0].gain)
    assert p.edits.item(0).text() == f"gain {db:+.1f} dB on d1".replace("-", "−")
    assert "×" not in p.edits.item(0).text()
    p.restore_button.click()
    assert p.choice == rp.RESTORE and p.result() == p.DialogCode.Accepted


def test_prompt_says_mute_for_gain_zero(qtbot, saved):
    # docs/vocabulary.md: mute is gain 0, −∞ dB in the window
    recipe = Recipe(TransformSpec("dwt", "db4", 5, "symmetric"),
                    (Edit("gain", levels=(1, 2), gain=0.0),
                     Edit("region", levels=(3,), start_s=0.5, stop_s=0.75, gain=0.25)))
    autosave.save_session(saved, recipe, {})
    p = rp.RestorePrompt(autosave.pending_restore(saved))
    qtbot.addWidget(p)
    lines = [p.edits.item(i).text() for i in range(p.edits.count())]
    assert lines[0] == "mute d1, d2 (−∞ dB)"
    assert lines[1].startswith("region ") and lines[1].endswith(" −12.0 dB on d3")
    assert not any("×" in ln for ln in lines)


def test_prompt_warns_when_the_recording_changed(qtbot, saved):
    saved.write_bytes(b"RIFF" + bytes(600))
    info = autosave.pending_restore(saved)
    p = rp.RestorePrompt(info)
    qtbot.addWidget(p)
    p.show()
    assert p.warning.isVisible() and "changed on disk" in p.warning.text()
    assert "size changed" in p.warning.text()
    p.discard_button.click()
    assert p.choice == rp.DISCARD


def test_prompt_escape_means_later_and_unreadable_recipe_cannot_be_restored(qtbot, saved):
    doc = RECIPE.to_json()
    doc["edits"][0]["gain"] = -3
    autosave.save_session(saved, doc, {})
    info = autosave.pending_restore(saved)
    p = rp.RestorePrompt(info)
    qtbot.addWidget(p)
    p.show()
    assert not p.restore_button.isEnabled() and p.problem.isVisible()
    assert "gain" in p.problem.text()
    p.reject()
    assert p.choice == rp.LATER
