"""`kurtosis` and `envelope` give the same JSON, bit for bit, in one thread or several."""

from __future__ import annotations

import json
import os

import pytest

from scalesieve.cli import main
from scalesieve.core import impulsive_bands as ib

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
FAN = os.path.join(ROOT, "sample_signals", "fan_bearing.wav")


def _out(capsys, *argv):
    assert main(list(argv)) == 0
    return capsys.readouterr().out


@pytest.mark.parametrize("command", [["kurtosis"], ["envelope", "--bearing", "10,8.0,42.0,0",
                                                    "--shaft", "29.5"]])
def test_one_thread_and_two_give_bit_identical_json(monkeypatch, capsys, command):
    # the invented fan recording is short: the threaded way is taken from 0 samples here,
    # and the signal cut in pieces of at least 256 deepest coefficients (two pieces)
    monkeypatch.setattr(ib, "THREADS_FROM", 0)
    monkeypatch.setattr(ib, "PIECE_FROM", 256)
    one = _out(capsys, command[0], FAN, *command[1:], "--json", "--threads", "1")
    two = _out(capsys, command[0], FAN, *command[1:], "--json", "--threads", "2")
    monkeypatch.setenv("SCALESIEVE_THREADS", "3")
    three = _out(capsys, command[0], FAN, *command[1:], "--json")
    assert one == two == three
    assert json.loads(one)["file"] == "fan_bearing.wav"


@pytest.mark.parametrize("argv, env, words", [
    (["kurtosis", FAN, "--threads", "0"], None, "--threads 0 must be a whole number"),
    (["envelope", FAN, "--threads", "-2"], None, "--threads -2 must be a whole number"),
    (["kurtosis", FAN], "many", "SCALESIEVE_THREADS='many' must be a whole number"),
])
def test_a_bad_thread_count_is_one_line(monkeypatch, capsys, argv, env, words):
    if env is not None:
        monkeypatch.setenv("SCALESIEVE_THREADS", env)
    assert main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("scalesieve: error: ") and words in err[0]


@pytest.mark.parametrize("argv", [["bands", FAN, "--transform", "packet", "--level", "3"],
                                  ["kurtosis", FAN, "--threads", "2"]])
def test_bands_and_kurtosis_import_no_heavy_library(argv):
    # a fresh process: what the command leaves in sys.modules (start-up time counts)
    import subprocess
    import sys

    code = ("import sys; from scalesieve.cli import main; main(%r); "
            "print('heavy:' + ','.join(m for m in ('scipy', 'jsonschema', 'psutil', 'dask', 'PySide6', "
            "'pyqtgraph', 'platformdirs') if m in sys.modules))" % (argv + ["--json"],))
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300)
    assert r.returncode == 0, r.stderr
    assert r.stdout.strip().splitlines()[-1] == "heavy:"
