"""`kurtosis` and `envelope` on awkward inputs: one line, exit 2, and the reader's warnings.

Expected facts are worked out here from the file written, not by the tool: a WAV cut
in half keeps the frame count its header was written with (4096), and PyWavelets' own
`dwt_max_level` says how deep a short recording allows.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys

import numpy as np
import pytest
import pywt
import soundfile as sf


def _cli(*argv):
    return subprocess.run([sys.executable, "-m", "scalesieve", *argv],
                          capture_output=True, text=True)


def _truncated_wav(path):
    x = (0.1 * np.random.default_rng(3).normal(size=4096)).astype("float32")
    full = str(path) + ".full.wav"
    sf.write(full, x, 8000, subtype="FLOAT")
    data = open(full, "rb").read()
    with open(path, "wb") as f:
        f.write(data[: len(data) // 2])
    return 4096


@pytest.mark.parametrize("command", ["kurtosis", "envelope"])
def test_a_truncated_wav_is_read_with_its_warning_on_stderr_and_in_the_json(tmp_path, command):
    path = tmp_path / "cut.wav"
    declared = _truncated_wav(path)
    r = _cli(command, str(path), "--json")
    assert r.returncode == 0, r.stderr
    lines = [ln for ln in r.stderr.splitlines() if ln]
    assert len(lines) == 1 and lines[0].startswith(f"scalesieve: warning: {path}: ")
    assert str(declared) in lines[0]
    assert "Traceback" not in r.stderr
    d = json.loads(r.stdout)
    assert len(d["warnings"]) == 1 and str(declared) in d["warnings"][0]


@pytest.mark.parametrize("command", ["kurtosis", "envelope"])
@pytest.mark.parametrize("n", [1, 10, 13])
def test_too_short_for_one_packet_depth_says_so_in_one_line(tmp_path, command, n):
    # PyWavelets: dwt_max_level(n, 8) is 0 below 2 * (8 - 1) = 14 samples
    assert pywt.dwt_max_level(n, pywt.Wavelet("db4").dec_len) == 0
    path = tmp_path / f"short{n}.wav"
    sf.write(str(path), np.ones(n, dtype="float32"), 8000, subtype="FLOAT")
    r = _cli(command, str(path))
    assert r.returncode == 2
    lines = [ln for ln in r.stderr.splitlines() if ln]
    assert len(lines) == 1, r.stderr
    assert lines[0].startswith(f"scalesieve: error: {path}: {n} sample")
    assert "too few" in lines[0] and "at least 14" in lines[0] and "--level" not in lines[0]


def test_fourteen_samples_give_one_depth():
    # PyWavelets: 14 samples allow exactly one level with a length-8 filter
    assert pywt.dwt_max_level(14, 8) == 1
