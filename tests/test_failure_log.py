"""One failure-log writer for the command line and the window (scalesieve.failure_log)."""

import os

import pytest

from scalesieve import failure_log


@pytest.fixture
def logs(tmp_path, monkeypatch):
    folder = tmp_path / "logs"
    monkeypatch.setenv(failure_log.LOG_DIR_ENV, str(folder))
    return folder


def test_command_line_failure_goes_to_the_shared_log_folder(logs, monkeypatch, capsys):
    from scalesieve import cli
    from scalesieve.commands import bands

    def broken(args):
        raise RuntimeError("a bug for the test")

    monkeypatch.setattr(bands, "run", broken)
    code = cli.main(["bands", "whatever.wav"])
    err = capsys.readouterr().err
    assert code == 1 and "unexpected failure: RuntimeError: a bug for the test" in err
    (name,) = os.listdir(logs)
    assert name.startswith("cli-failure-") and name.endswith(".log")
    text = (logs / name).read_text(encoding="utf-8")
    assert "(cli)" in text and "RuntimeError: a bug for the test" in text
    assert str(logs / name) in err


def test_window_lines_use_the_same_writer(logs):
    from scalesieve.gui.error_dialog import write_failure_log

    try:
        raise ValueError("window bug")
    except ValueError as exc:
        where = write_failure_log(exc)
    (name,) = os.listdir(logs)
    assert name.startswith("window-failure-") and where == f"; details in {logs / name}"
    assert "ValueError: window bug" in (logs / name).read_text(encoding="utf-8")


def test_pruning_counts_every_failure_log(logs):
    os.makedirs(logs)
    for k in range(failure_log.KEEP_LOGS):
        (logs / f"cli-failure-20260101-000000-{k:06d}-1.log").write_text("x")
    newest = failure_log.write_log("details", "window")
    assert len(os.listdir(logs)) == failure_log.KEEP_LOGS and os.path.exists(newest)
    assert not (logs / "cli-failure-20260101-000000-000000-1.log").exists()
