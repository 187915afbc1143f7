"""``clean --removed``: both outputs appear, or neither (CONTRACT: "Outputs are
written to a temporary file beside the target, then renamed into place";
nothing the user had is lost).

The full disk is a small tmpfs (tests/full_disk.py; skipped where mounting is
not permitted); the twin patches the second write to fail with ENOSPC.
"""

from __future__ import annotations

import errno
import os
import wave

import numpy as np
import pytest

from full_disk import small_disk
from scalesieve import api
from scalesieve.cli import main
from scalesieve.errors import ScalesieveError


def _wav16(path, seconds=2.0, rate=48000):
    # written with Python's own wave module: 16-bit PCM, mono
    t = np.arange(int(seconds * rate)) / rate
    x = 0.3 * np.sin(2 * np.pi * 97.0 * t) + 0.01 * np.random.default_rng(2).standard_normal(t.size)
    pcm = np.round(x * 32767).astype("<i2")
    with wave.open(str(path), "wb") as w:
        w.setnchannels(1)
        w.setsampwidth(2)
        w.setframerate(rate)
        w.writeframes(pcm.tobytes())
    return path


def test_a_disk_that_fills_during_the_second_file_leaves_neither(tmp_path, capsys):
    src = _wav16(tmp_path / "fan_run.wav")           # 192 kB of samples
    with small_disk(tmp_path, 320 << 10) as disk:    # room for one output, not two
        out, rem = os.path.join(disk, "cleaned.wav"), os.path.join(disk, "removed.wav")
        code = main(["clean", str(src), "-o", out, "--removed", rem, "--zero", "1"])
        err = capsys.readouterr().err
        assert code == 2 and err.count("\n") == 1 and "not enough disk space" in err
        assert sorted(os.listdir(disk)) == []


def test_with_force_the_old_files_stay_when_the_second_write_fails(tmp_path, monkeypatch):
    # Twin with a patched write: the second export fails as a full disk makes it fail.
    src = _wav16(tmp_path / "fan_run.wav", seconds=0.5)
    out, rem = tmp_path / "cleaned.wav", tmp_path / "removed.wav"
    out.write_bytes(b"old cleaned")
    rem.write_bytes(b"old removed")
    real = api.export
    calls = []

    def export(model, path, what="cleaned", **kw):
        calls.append(what)
        if what == "removed":
            raise ScalesieveError(os.strerror(errno.ENOSPC), os.fspath(path))
        return real(model, path, what, **kw)

    monkeypatch.setattr(api, "export", export)
    from scalesieve.batch import clean_file
    from scalesieve.recipe import Edit

    with pytest.raises(ScalesieveError) as err:
        clean_file(str(src), str(out), edits=[Edit("gain", levels=(1,), gain=0.0)],
                   removed=str(rem), force=True)
    assert calls == ["cleaned", "removed"]
    assert str(rem) in err.value.one_line() and ".tmp-scalesieve-" not in err.value.one_line()
    assert out.read_bytes() == b"old cleaned" and rem.read_bytes() == b"old removed"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["cleaned.wav", "fan_run.wav",
                                                         "removed.wav"]


def test_both_written_when_there_is_room(tmp_path):
    import soundfile as sf

    src = _wav16(tmp_path / "fan_run.wav", seconds=0.5)
    out, rem = tmp_path / "c.wav", tmp_path / "r.wav"
    assert main(["clean", str(src), "-o", str(out), "--removed", str(rem), "--zero", "1"]) == 0
    x, _ = sf.read(str(src))
    c, _ = sf.read(str(out))
    r, _ = sf.read(str(rem))
    # cleaned + removed = original, to the 16-bit quantisation of both files
    assert np.max(np.abs(c + r - x)) <= 2.0 / 32768
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c.wav", "fan_run.wav", "r.wav"]
