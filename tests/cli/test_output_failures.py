"""Standard output that cannot be written is an ordinary error; a closed pipe is quiet.

CONTRACT ("Exit status"): bad input or usage is one line and exit 2, never the
"unexpected failure" of exit 1.  /dev/full is the Linux device whose every
write fails with ENOSPC (null(4)); a pipe whose reader has gone gives EPIPE.
"""

from __future__ import annotations

import errno
import io
import os
import subprocess
import sys

import pytest

from scalesieve.cli import main

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
DEMO = os.path.join(ROOT, "sample_signals", "pump_bearing.wav")


@pytest.mark.skipif(not os.path.exists("/dev/full"), reason="no /dev/full here")
@pytest.mark.parametrize("argv", [["bands", DEMO, "--json"], ["bands", DEMO], ["--version"]])
def test_output_to_a_full_device_is_one_line_and_exit_2(argv):
    with open("/dev/full", "w") as full:
        done = subprocess.run([sys.executable, "-m", "scalesieve", *argv], stdout=full,
                              stderr=subprocess.PIPE, text=True, timeout=120)
    lines = done.stderr.strip().splitlines()
    assert done.returncode == 2, done.stderr
    assert len(lines) == 1 and lines[0].startswith("scalesieve: error: standard output:")
    assert "not enough disk space" in lines[0]
    assert "unexpected" not in done.stderr and "Traceback" not in done.stderr


def test_a_closed_pipe_is_quiet():
    r, w = os.pipe()
    proc = subprocess.Popen([sys.executable, "-m", "scalesieve", "bands", DEMO, "--json"],
                            stdout=w, stderr=subprocess.PIPE, text=True)
    os.close(w)
    os.close(r)                 # the reader is gone before anything is written
    _, err = proc.communicate(timeout=120)
    assert err == ""
    assert proc.returncode == 0


class _Failing(io.StringIO):
    def __init__(self, code):
        super().__init__()
        self.code = code

    def write(self, text):
        raise OSError(self.code, os.strerror(self.code))


def test_a_failing_stdout_in_process(monkeypatch, capsys):
    # Twin of the /dev/full case where that device does not exist.
    monkeypatch.setattr(sys, "stdout", _Failing(errno.ENOSPC))
    assert main(["bands", DEMO, "--json"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "standard output" in err and "disk space" in err


def test_other_os_errors_are_not_taken_for_output_errors(tmp_path, capsys):
    # A missing input is still the input's one-line error.
    assert main(["bands", str(tmp_path / "nope.wav")]) == 2
    assert "standard output" not in capsys.readouterr().err
