"""A folder whose filesystem reports no size cannot hold files: one rule for every room check.

Linux pseudo-filesystems (/proc, /sys) report 0 blocks in statvfs (from memory; checked on
this machine: ``shutil.disk_usage("/proc")`` gives total 0).  A folder made here stands in
for one, by patching ``shutil.disk_usage`` for it alone.  Each case is one line, exit 2
(CONTRACT.md: bad input), nothing written and the input unchanged.
"""

from __future__ import annotations

import json
import os
import shutil
import tempfile
from collections import namedtuple

import pytest

from scalesieve import memory_guard
from scalesieve.cli import main
from scalesieve.errors import ScalesieveError
from scalesieve.io.folder_room import free_bytes

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
PUMP = os.path.join(ROOT, "sample_signals", "pump_bearing.wav")
STRAIN = os.path.join(ROOT, "sample_signals", "rig_strain_logger.csv")

Usage = namedtuple("Usage", "total used free")


@pytest.fixture
def pseudo(tmp_path, monkeypatch):
    folder = tmp_path / "pseudo"
    folder.mkdir()
    real = shutil.disk_usage
    # a pseudo-filesystem's figures: no size, and (as /proc says) nothing free either
    monkeypatch.setattr(shutil, "disk_usage",
                        lambda p: Usage(0, 0, 0) if os.path.samefile(p, folder) else real(p))
    return folder


def _one_line(capsys) -> str:
    err = [ln for ln in capsys.readouterr().err.splitlines() if ln]
    assert len(err) == 1, err
    assert err[0].startswith("scalesieve: error: ") and "Traceback" not in err[0]
    return err[0]


def test_the_rule_itself(pseudo, tmp_path):
    with pytest.raises(ScalesieveError, match=f"the folder {pseudo} cannot hold files"):
        free_bytes(pseudo)
    # an ordinary folder: its free bytes, as shutil gives them
    assert free_bytes(tmp_path) == shutil.disk_usage(tmp_path).free
    # a folder the system cannot ask about: unknown, not an error
    assert free_bytes(tmp_path / "missing") is None


@pytest.mark.skipif(not os.path.isdir("/proc") or shutil.disk_usage("/proc").total != 0,
                    reason="no /proc pseudo-filesystem here")
def test_proc_itself():
    with pytest.raises(ScalesieveError, match="the folder /proc cannot hold files"):
        free_bytes("/proc")


def test_a_text_tables_temporary_rows_in_such_a_folder(pseudo, tmp_path, monkeypatch, capsys):
    # a text table in blocks parses its rows into a temporary file in the temporary folder
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 0)
    monkeypatch.setattr(tempfile, "tempdir", str(pseudo))
    before = open(STRAIN, "rb").read()
    out = tmp_path / "out.csv"
    assert main(["clean", STRAIN, "-o", str(out), "--zero", "1"]) == 2
    line = _one_line(capsys)
    assert f"the folder {pseudo} cannot hold files" in line and "TMPDIR" in line
    assert "disk space" not in line and "GiB free" not in line
    assert not out.exists() and os.listdir(pseudo) == []
    assert open(STRAIN, "rb").read() == before


def test_a_batch_output_folder_on_such_a_filesystem(pseudo, tmp_path, capsys):
    recipe = tmp_path / "r.json"
    recipe.write_text(json.dumps({"scalesieve_recipe": 1, "edits": [
        {"op": "gain", "levels": [1], "gain": 0.0}]}))
    assert main(["batch", "--recipe", str(recipe), "-o", str(pseudo), PUMP]) == 2
    line = _one_line(capsys)
    assert line == (f"scalesieve: error: {pseudo}: the folder {pseudo} cannot hold files (its "
                    "filesystem reports no size, as system folders like /proc do); choose "
                    "another output folder; nothing was cleaned")
    assert os.listdir(pseudo) == []
