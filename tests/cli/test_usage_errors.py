"""Usage errors (missing or extra arguments, bad choices): one line naming the command, what
was wrong and a short usage hint; exit 2 (CONTRACT.md: 2 for bad input or usage).

The "what was wrong" part is argparse's own wording (Python's argparse module), kept as it
says it; the command and the usage hint are ours.
"""

from __future__ import annotations

import os
import subprocess
import sys

import pytest

from scalesieve.cli import main

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
PUMP = os.path.join(ROOT, "sample_signals", "pump_bearing.wav")


def _hint(command: str, usage: str) -> str:
    prog = f"scalesieve {command}".strip()
    return f" (usage: {usage}; '{prog} --help' tells more)"


CASES = [
    (["clean"], "clean: the following arguments are required: FILE, -o/--output",
     "clean", "scalesieve clean FILE -o OUT [options]"),
    (["clean", PUMP], "clean: the following arguments are required: -o/--output",
     "clean", "scalesieve clean FILE -o OUT [options]"),
    (["bands", PUMP, "extra.wav"], "bands: unrecognized arguments: extra.wav",
     "bands", "scalesieve bands FILE [options]"),
    (["bands", PUMP, "--transform", "wavelet"],
     "bands: argument --transform: invalid choice: 'wavelet' (choose from 'dwt', 'swt', "
     "'packet')", "bands", "scalesieve bands FILE [options]"),
    (["events", PUMP, "--k"], "events: argument --k: expected one argument",
     "events", "scalesieve events FILE [options]"),
    (["batch", PUMP], "batch: the following arguments are required: --recipe, "
     "-o/--output/--outdir", "batch", "scalesieve batch INPUT ... --recipe R.json -o OUTDIR "
     "[options]"),
    (["kurtosis"], "kurtosis: the following arguments are required: FILE",
     "kurtosis", "scalesieve kurtosis FILE [options]"),
    (["envelope", PUMP, "--band"], "envelope: argument --band: expected one argument",
     "envelope", "scalesieve envelope FILE [options]"),
    ([PUMP, "--snapshot"], "argument --snapshot: expected one argument",
     "", "scalesieve [FILE] [options]"),
    ([PUMP, "second.wav"], "unrecognized arguments: second.wav",
     "", "scalesieve [FILE] [options]"),
]


@pytest.mark.parametrize("argv, what, command, usage", CASES, ids=lambda v: str(v)[:40])
def test_a_usage_error_is_one_line_with_the_command_and_a_hint(capsys, argv, what, command,
                                                               usage):
    assert main(argv) == 2
    err = [ln for ln in capsys.readouterr().err.splitlines() if ln]
    assert err == [f"scalesieve: error: {what}{_hint(command, usage)}"]


def test_the_hint_names_a_command_line_the_parser_takes(tmp_path):
    # the usage hint of clean, filled in, is a run that works (nothing is left out of it)
    out = tmp_path / "out.wav"
    assert main(["clean", PUMP, "-o", str(out), "--zero", "1"]) == 0 and out.exists()


def test_a_first_word_that_is_neither_a_command_nor_a_file(capsys):
    assert main(["band", PUMP]) == 2
    err = [ln for ln in capsys.readouterr().err.splitlines() if ln]
    assert err == ["scalesieve: error: 'band' is neither a command (bands, clean, events, "
                   "batch, kurtosis, envelope) nor a file (usage: scalesieve COMMAND ... or "
                   "scalesieve [FILE] [options]; 'scalesieve --help' tells more)"]
    # a file name keeps the reader's own words
    assert main([os.path.join(ROOT, "missing.wav")]) == 2
    assert "missing.wav: file not found" in capsys.readouterr().err


def test_from_the_shell_too_without_a_traceback():
    r = subprocess.run([sys.executable, "-m", "scalesieve", "events"], capture_output=True,
                       text=True, timeout=120)
    assert r.returncode == 2
    assert r.stderr.splitlines() == [
        "scalesieve: error: events: the following arguments are required: FILE"
        + _hint("events", "scalesieve events FILE [options]")]
