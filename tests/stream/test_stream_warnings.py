"""A shortened WAV's warning reaches the user on every path: blocks and batch too.

Reference: Python's wave module writes the file (its header declares every frame);
cutting its bytes leaves a header that promises more than the file holds.
"""

import json
import wave

import numpy as np
import pytest

from scalesieve import memory_guard
from scalesieve.cli import main


def _shortened(path, frames=40_000, held=30_000):
    x = (np.sin(np.arange(frames) / 7.0) * 20000).astype("<i2")
    with wave.open(str(path), "wb") as w:
        w.setnchannels(1)
        w.setsampwidth(2)
        w.setframerate(8000)
        w.writeframes(x.tobytes())
    raw = path.read_bytes()
    path.write_bytes(raw[:44 + 2 * held])       # 44-byte canonical header + held frames
    return frames, held


@pytest.mark.parametrize("in_blocks", [False, True])
def test_clean_warns_whole_and_in_blocks(tmp_path, monkeypatch, capsys, in_blocks):
    src = tmp_path / "cut.wav"
    frames, held = _shortened(src)
    if in_blocks:
        monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 16)
    assert main(["clean", str(src), "-o", str(tmp_path / "out.wav"), "--zero", "1"]) == 0
    err = capsys.readouterr().err
    assert ("in blocks" in err) == in_blocks
    assert f"scalesieve: warning: {src}: the header declares {frames} frames" in err
    assert f"holds {held}" in err


def test_batch_reports_and_prints_the_warning(tmp_path, capsys):
    src = tmp_path / "cut.wav"
    frames, held = _shortened(src)
    recipe = tmp_path / "r.json"
    recipe.write_text(json.dumps({"scalesieve_recipe": 1,
                                  "edits": [{"op": "gain", "levels": [1], "gain": 0.0}]}))
    out = tmp_path / "out"
    assert main(["batch", "--recipe", str(recipe), "-o", str(out), str(src)]) == 0
    err = capsys.readouterr().err
    assert f"the header declares {frames} frames" in err
    report = json.loads((out / "batch-report.json").read_text())
    (entry,) = report["files"]
    assert entry["status"] == "ok"
    assert any(f"declares {frames} frames" in w and f"holds {held}" in w
               for w in entry["warnings"])
