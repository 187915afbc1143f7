"""Messages for three kinds of bad input, each one line and exit 2 (CONTRACT.md: usage and
input errors exit 2), with nothing written and the input unchanged.

The recording is the invented pump sample; the empty one is written here with soundfile.
"""

from __future__ import annotations

import os
import shutil
from collections import namedtuple

import numpy as np
import pytest
import soundfile as sf

from scalesieve.cli import main

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
PUMP = os.path.join(ROOT, "sample_signals", "pump_bearing.wav")


def _one_line(capsys) -> str:
    err = [ln for ln in capsys.readouterr().err.splitlines() if ln]
    assert len(err) == 1, err
    assert err[0].startswith("scalesieve: error: ") and "Traceback" not in err[0]
    return err[0]


def test_a_level_past_the_limit_names_the_transforms_levels(tmp_path, capsys):
    # --zero 12 and --zero 99 are both past the pump transform's depth: the same sentence
    out = tmp_path / "out.wav"
    assert main(["clean", PUMP, "-o", str(out), "--zero", "12"]) == 2
    twelve = _one_line(capsys)
    assert main(["clean", PUMP, "-o", str(out), "--zero", "99"]) == 2
    ninety_nine = _one_line(capsys)
    assert "is not in the transform (it has detail levels 1-" in twelve
    assert ninety_nine == twelve.replace("level 12 ", "level 99 ")
    assert not out.exists()


def test_a_recipe_file_level_past_the_limit_is_still_refused_at_load(tmp_path, capsys):
    # the file's own range check (1 to 64) stays: a recipe is checked before any transform
    recipe = tmp_path / "r.json"
    recipe.write_text('{"scalesieve_recipe": 1, "edits": [{"op": "gain", "levels": [99], '
                      '"gain": 0.0}]}')
    assert main(["clean", PUMP, "-o", str(tmp_path / "out.wav"), "--recipe", str(recipe)]) == 2
    assert "99" in _one_line(capsys)


@pytest.mark.parametrize("command", ["events", "bands", "kurtosis", "envelope"])
def test_an_empty_recording_reads_the_same_for_every_command(tmp_path, capsys, command):
    empty = tmp_path / "empty.wav"
    sf.write(empty, np.zeros((0, 1)), 8000)
    before = empty.read_bytes()
    assert main([command, str(empty)]) == 2
    assert _one_line(capsys) == f"scalesieve: error: {empty}: holds no audio samples (0 frames)"
    assert empty.read_bytes() == before


def test_a_folder_whose_filesystem_reports_no_size_cannot_hold_files(tmp_path, capsys,
                                                                      monkeypatch):
    # Linux pseudo-filesystems (/proc, /sys) report 0 blocks in statvfs (from memory; checked
    # on this machine: shutil.disk_usage("/proc") gives total 0); the folder here stands in
    Usage = namedtuple("Usage", "total used free")
    real = shutil.disk_usage
    pseudo = tmp_path / "pseudo"
    pseudo.mkdir()
    monkeypatch.setattr(shutil, "disk_usage",
                        lambda p: Usage(0, 0, 0) if os.path.samefile(p, pseudo) else real(p))
    for name in ("x.wav", "x.flac"):
        assert main(["clean", PUMP, "-o", str(pseudo / name), "--zero", "1"]) == 2
        line = _one_line(capsys)
        assert f"the folder {pseudo} cannot hold files" in line
        assert "disk space" not in line
    assert os.listdir(pseudo) == []


@pytest.mark.skipif(not os.path.isdir("/proc") or shutil.disk_usage("/proc").total != 0,
                    reason="no /proc pseudo-filesystem here")
def test_proc_itself_cannot_hold_files(tmp_path, capsys):
    assert main(["clean", PUMP, "-o", "/proc/x.wav", "--zero", "1"]) == 2
    assert "the folder /proc cannot hold files" in _one_line(capsys)
