"""What the memory guard tells a user, command by command, on a recording larger than the
memory said to be free (``scalesieve.memory_guard.available_memory`` patched).

Each command either works in blocks and says so with what that costs (the figure of its own
blocks: ``stream.choice.events_bytes`` for ``events``, ``stream.choice.stream_bytes`` for
``clean``, ``batch`` and ``bands``), or refuses in one line naming the figure and what needs
less, with exit 2 (CONTRACT.md) and nothing written.  The recording is invented noise
written with soundfile; the figures checked are the estimates themselves, not measurements.
"""

from __future__ import annotations

import json
import os
import re

import numpy as np
import pytest
import soundfile as sf

from scalesieve import memory_guard
from scalesieve.cli import main
from scalesieve.core.transforms import TransformSpec
from scalesieve.stream.choice import events_bytes, stream_bytes

FRAMES = 1 << 21
#: bands and clean here use 4 levels: their blocks then cost less than the whole array
LEVEL = ["--level", "4"]
MIB = 2 ** 20


@pytest.fixture(scope="module")
def stereo(tmp_path_factory):
    path = tmp_path_factory.mktemp("guard") / "night.wav"
    rng = np.random.default_rng(16)
    sf.write(path, 0.05 * rng.standard_normal((FRAMES, 2)), 8000, subtype="PCM_16")
    return path


def _free(monkeypatch, nbytes: int) -> None:
    monkeypatch.setattr(memory_guard, "available_memory", lambda: int(nbytes))


def _lines(capsys) -> list[str]:
    err = [ln for ln in capsys.readouterr().err.splitlines() if ln]
    assert not any("Traceback" in ln for ln in err), err
    return err


def _mib(nbytes: int) -> str:
    return f"{nbytes / MIB:.0f} MiB"


def _whole(path, spec) -> int:
    return memory_guard.estimate(memory_guard.probe_quietly(path), transform=spec)


def test_the_figures_leave_room_between_blocks_and_whole(stereo):
    # the cases below need a free memory between the blocks' figure and the whole array's
    dwt = TransformSpec(level=4)
    assert stream_bytes(2, dwt) + 16 * MIB < _whole(stereo, dwt)
    swt = TransformSpec(kind="swt", level=12)
    # (the clean's SWT blocks would not fit where events' own do)
    assert events_bytes(2, swt, [1, 2]) + 16 * MIB < min(stream_bytes(2, swt), _whole(stereo, swt))


@pytest.mark.parametrize("command", ["bands", "clean"])
def test_past_the_free_memory_bands_and_clean_say_they_work_in_blocks(
        stereo, tmp_path, monkeypatch, capsys, command):
    spec = TransformSpec(level=4)
    cost = stream_bytes(2, spec, clean=command == "clean")
    _free(monkeypatch, cost + 8 * MIB)
    out = tmp_path / "clean.wav"
    argv = [command, str(stereo), *LEVEL] + (["-o", str(out), "--zero", "1"]
                                             if command == "clean" else ["--json"])
    assert main(argv) == 0
    notes = [ln for ln in _lines(capsys) if ln.startswith("scalesieve: note:")]
    assert len(notes) == 1, notes
    assert "in blocks" in notes[0] and f"about {_mib(cost)} of memory" in notes[0]
    # and why: the whole array would need more than is free
    whole = _whole(stereo, spec)
    assert f"whole it would need about {_mib(whole)}, more than the " \
           f"{_mib(cost + 8 * MIB)} free" in notes[0]


@pytest.mark.parametrize("command", ["bands", "clean"])
def test_too_little_even_for_blocks_is_one_line_naming_the_figure_and_ways(
        stereo, tmp_path, monkeypatch, capsys, command):
    spec = TransformSpec(level=4)
    cost = stream_bytes(2, spec, clean=command == "clean")
    _free(monkeypatch, cost - 8 * MIB)
    out = tmp_path / "clean.wav"
    argv = [command, str(stereo), *LEVEL] + (["-o", str(out), "--zero", "1"]
                                             if command == "clean" else [])
    assert main(argv) == 2
    err = _lines(capsys)
    assert len(err) == 1, err
    one = stream_bytes(1, spec, clean=command == "clean")
    assert err[0] == (f"scalesieve: error: {stereo}: needs about {_mib(cost)} of memory even "
                      f"in blocks, but only {_mib(cost - 8 * MIB)} is available; these need "
                      f"less: one channel at a time (--channel K) about {_mib(one)}; or close "
                      "other programs to free memory")
    assert not out.exists() and os.listdir(tmp_path) == []


def test_events_decide_with_what_events_in_blocks_hold(stereo, monkeypatch, capsys):
    # free memory between events' own figure and the clean's SWT figure: in blocks, not refused
    swt = TransformSpec(kind="swt", level=12)
    cost = events_bytes(2, swt, [1, 2])
    _free(monkeypatch, cost + 8 * MIB)
    assert main(["events", str(stereo), "--level", "12", "--json"]) == 0
    capsys_out = capsys.readouterr()
    notes = [ln for ln in capsys_out.err.splitlines() if ln.startswith("scalesieve: note:")]
    assert len(notes) == 1, notes
    assert "read in blocks" in notes[0] and f"about {_mib(cost)} of memory" in notes[0]
    assert f"more than the {_mib(cost + 8 * MIB)} free" in notes[0]
    blocks = json.loads(capsys_out.out)
    # the same events as with memory to spare (the whole-array computation)
    monkeypatch.setattr(memory_guard, "available_memory", lambda: 1 << 40)
    assert main(["events", str(stereo), "--level", "12", "--json"]) == 0
    whole = capsys.readouterr()
    assert "note:" not in whole.err
    assert json.loads(whole.out)["events"] == blocks["events"]


def test_events_too_large_even_in_blocks_say_what_needs_less(stereo, monkeypatch, capsys):
    swt = TransformSpec(kind="swt", level=12)
    cost = events_bytes(2, swt, [1, 2, 3, 4])
    _free(monkeypatch, 100 * MIB)
    assert main(["events", str(stereo), "--level", "12", "--levels", "1-4"]) == 2
    err = _lines(capsys)
    assert len(err) == 1, err
    assert err[0].startswith(f"scalesieve: error: {stereo}: needs about {_mib(cost)} of memory "
                             f"even in blocks, but only 100 MiB is available; these need less: ")
    assert f"one channel at a time (--channel K) about {_mib(events_bytes(1, swt, [1, 2, 3, 4]))}"\
        in err[0]
    dwt = TransformSpec(level=12)
    assert f"the DWT (--transform dwt) about {_mib(events_bytes(2, dwt, [1, 2, 3, 4]))}" in err[0]
    assert f"levels 1 and 2 only (--levels 1,2) about {_mib(events_bytes(2, swt, [1, 2]))}" \
        in err[0]


def test_events_that_cannot_run_in_blocks_are_refused_whole_with_the_reason(
        tmp_path, monkeypatch, capsys):
    # a MATLAB v5 file is read whole by its library (scipy.io, which writes it here);
    # before, events read it whole whatever was free
    from scipy import io as sio

    from scalesieve.stream.choice import WHOLE_FORMATS

    path = tmp_path / "night.mat"
    rng = np.random.default_rng(16)
    sio.savemat(path, {"fs": 8000.0, "x": 0.05 * rng.standard_normal((FRAMES // 16, 2))})
    _free(monkeypatch, 1 * MIB)
    assert main(["events", str(path)]) == 2
    err = _lines(capsys)
    assert len(err) == 1, err
    assert re.match(rf"scalesieve: error: {re.escape(str(path))}: needs about [\d.]+ [MG]iB "
                    r"of memory \([\d,]+ samples x 2 channels in float64\), but only 1 MiB "
                    r"is available; ", err[0]), err[0]
    assert f"it cannot be worked on in blocks ({WHOLE_FORMATS['MATLAB']})" in err[0]


#: a batch in its own process (one thread, so its workers are forked and keep the patch)
TIGHT_BATCH = """
import sys
from scalesieve import memory_guard
memory_guard.available_memory = lambda: int(sys.argv[1])
from scalesieve.cli import main
sys.exit(main(sys.argv[2:]))
"""


def _batch(free: int, *args):
    import subprocess
    import sys

    return subprocess.run([sys.executable, "-c", TIGHT_BATCH, str(free), "batch", *args],
                          capture_output=True, text=True, timeout=300)


def test_batch_reports_files_cleaned_in_blocks_and_refuses_what_does_not_fit(stereo, tmp_path):
    recipe = tmp_path / "r.json"
    recipe.write_text(json.dumps({"scalesieve_recipe": 1, "transform": {
        "kind": "dwt", "wavelet": "db4", "level": 4, "mode": "symmetric"},
        "edits": [{"op": "gain", "levels": [1], "gain": 0.0}]}))
    cost = stream_bytes(2, TransformSpec(level=4))
    out = tmp_path / "out"
    done = _batch(cost + 8 * MIB, "--recipe", str(recipe), "-o", str(out), "--workers", "1",
                  str(stereo))
    assert done.returncode == 0, done.stderr
    notes = [ln for ln in done.stderr.splitlines() if ln.startswith("scalesieve: note:")]
    assert notes == [f"scalesieve: note: {stereo}: cleaned in blocks, 1 pass, about "
                     f"{_mib(cost)} of memory"]
    entry = json.loads((out / "batch-report.json").read_text())["files"][0]
    assert entry["status"] == "ok" and entry["blocks"]["bytes"] == cost
    # too little even for the blocks: that file fails with the guard's line, the batch exits 1
    again = tmp_path / "again"
    done = _batch(cost - 8 * MIB, "--recipe", str(recipe), "-o", str(again), "--workers", "1",
                  str(stereo))
    assert done.returncode == 1, done.stderr
    assert "Traceback" not in done.stderr
    entry = json.loads((again / "batch-report.json").read_text())["files"][0]
    assert entry["status"] == "error"
    assert f"needs about {_mib(cost)} of memory even in blocks" in entry["error"]
    assert not (again / stereo.name).exists()
