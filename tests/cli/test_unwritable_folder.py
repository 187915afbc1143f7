"""An output folder that refuses writing (EACCES, as for a folder without write
permission) is one line and exit 2 for each writing command, and nothing there changes.

The tests run as any user (root may write anywhere), so the refusal is made the way the
operating system reports it: `tempfile.mkstemp` raising PermissionError(EACCES) (errno
values from Python's errno module).  The recording is the invented pump sample.
"""

from __future__ import annotations

import errno
import os
import shutil

import pytest

from scalesieve.cli import main

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
PUMP = os.path.join(ROOT, "sample_signals", "pump_bearing.wav")


@pytest.fixture
def refusing(monkeypatch):
    import tempfile

    real = tempfile.mkstemp

    def mkstemp(*a, dir=None, **k):
        if dir is not None and os.path.basename(os.fspath(dir)) == "locked":
            raise PermissionError(errno.EACCES, os.strerror(errno.EACCES))
        return real(*a, dir=dir, **k)

    monkeypatch.setattr(tempfile, "mkstemp", mkstemp)


@pytest.mark.parametrize("argv", [
    ["clean", "{in}", "-o", "{locked}/out.wav", "--zero", "1"],
    ["events", "{in}", "--csv", "{locked}/events.csv"],
    ["envelope", "{in}", "--csv", "{locked}/spectrum.csv"],
    ["batch", "--recipe", "{recipe}", "-o", "{locked}", "{in}"],
])
def test_a_folder_that_refuses_writing_is_one_line(tmp_path, capsys, refusing, argv):
    locked = tmp_path / "locked"
    locked.mkdir()
    src = tmp_path / "pump.wav"
    shutil.copy(PUMP, src)
    before = src.read_bytes()
    recipe = tmp_path / "mute_d1.json"
    recipe.write_text('{"scalesieve_recipe": 1, "edits": [{"op": "gain", "levels": [1], '
                      '"gain": 0.0}]}')
    argv = [a.replace("{in}", str(src)).replace("{locked}", str(locked))
            .replace("{recipe}", str(recipe)) for a in argv]
    assert main(argv) == 2
    err = [ln for ln in capsys.readouterr().err.splitlines() if ln]
    assert len(err) == 1, err
    assert err[0].startswith("scalesieve: error: ") and "permission denied" in err[0]
    assert "Traceback" not in err[0]
    assert os.listdir(locked) == []
    assert src.read_bytes() == before
