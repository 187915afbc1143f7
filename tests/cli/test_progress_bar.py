"""The progress bar on stderr: only on a terminal, only for large recordings."""

import io
import json
import wave

import numpy as np

from scalesieve.cli import main
from scalesieve.commands import progress


class Terminal(io.StringIO):
    def isatty(self):
        return True


def _wav16(path, frames, rate=8000):
    # written with Python's own wave module: 16-bit PCM, mono
    x = 0.1 * np.random.default_rng(0).standard_normal(frames)
    with wave.open(str(path), "wb") as w:
        w.setnchannels(1)
        w.setsampwidth(2)
        w.setframerate(rate)
        w.writeframes(np.round(x * 32767).astype("<i2").tobytes())


def test_bar_only_on_a_terminal_and_for_large_files(tmp_path, monkeypatch):
    f = tmp_path / "a.wav"
    _wav16(f, 5000)
    with progress.for_file(str(f), stream=io.StringIO()) as bar:
        assert bar is None                                   # not a terminal
    with progress.for_file(str(f), stream=Terminal()) as bar:
        assert bar is None                                   # small
    monkeypatch.setattr(progress, "LARGE_SAMPLES", 1000)
    monkeypatch.setattr(progress, "REFRESH_S", 0)             # draw every step
    term = Terminal()
    with progress.for_file(str(f), stream=term) as bar:
        bar(0.25, "decomposing channel 1 of 1")
        bar(1.0, "decomposed")
    assert "decomposing channel 1 of 1" in term.getvalue()
    assert "100%" in term.getvalue()
    with progress.for_file(str(tmp_path / "missing.wav"), stream=Terminal()) as bar:
        assert bar is None                                   # the reader will say why


def test_bands_draws_on_a_terminal_and_prints_the_same(tmp_path, monkeypatch, capsys):
    f = tmp_path / "a.wav"
    _wav16(f, 20000)
    assert main(["bands", str(f), "--json"]) == 0
    plain = capsys.readouterr()
    assert plain.err == ""
    monkeypatch.setattr(progress, "LARGE_SAMPLES", 1000)
    monkeypatch.setattr(progress, "REFRESH_S", 0)
    term = Terminal()
    monkeypatch.setattr("sys.stderr", term)
    assert main(["bands", str(f), "--json"]) == 0
    assert json.loads(capsys.readouterr().out) == json.loads(plain.out)
    assert "decompos" in term.getvalue()
