"""A full disk is said plainly, with the path, and leaves nothing half-written.

The disk is a small tmpfs mounted for the test (tests/full_disk.py; skipped
where mounting is not permitted); each case has a twin where the write is
patched to fail as libsndfile fails on a full disk ("System error.", the only
text it gives; errno ENOSPC, "No space left on device", from the OS).
"""

from __future__ import annotations

import os

import numpy as np
import pytest
import soundfile as sf

from full_disk import fill, small_disk
from scalesieve.errors import ScalesieveError
from scalesieve.io import writers


def _signal(seconds=4.0, rate=48000):
    t = np.arange(int(seconds * rate)) / rate
    return 0.4 * np.sin(2 * np.pi * 440.0 * t)


def _leftovers(folder):
    return sorted(n for n in os.listdir(folder) if n != "filler.bin")


def test_wav_on_a_full_tmpfs_is_refused_before_writing(tmp_path):
    with small_disk(tmp_path, 256 << 10) as disk:
        target = os.path.join(disk, "pump_cleaned.wav")
        with pytest.raises(ScalesieveError) as err:
            writers.write_audio(target, _signal(), 48000, subtype="PCM_16")
        line = err.value.one_line()
        assert "not enough disk space" in line and target in line
        assert _leftovers(disk) == []


def test_wav_when_the_disk_fills_during_the_write(tmp_path, monkeypatch):
    # The space was there when the write began (the check passed), then gone.
    monkeypatch.setattr(writers, "_check_space", lambda target, need: None)
    with small_disk(tmp_path, 1 << 20) as disk:
        fill(disk, 64 << 10)
        target = os.path.join(disk, "pump_cleaned.wav")
        with pytest.raises(ScalesieveError) as err:
            writers.write_audio(target, _signal(), 48000, subtype="PCM_16")
        line = err.value.one_line()
        assert "not enough disk space" in line and target in line, line
        assert "System error" not in line
        assert _leftovers(disk) == []


def test_wav_write_failing_as_libsndfile_does_on_a_full_disk(tmp_path, monkeypatch):
    # Twin of the tmpfs case: soundfile raises its "System error." and the disk has no room.
    def failing_write(self, data):
        raise sf.SoundFileError("System error.")

    monkeypatch.setattr(sf.SoundFile, "write", failing_write)
    monkeypatch.setattr(writers, "_free_bytes", lambda path: 0 if ".tmp-" in path else 10 ** 12)
    target = str(tmp_path / "pump_cleaned.wav")
    with pytest.raises(ScalesieveError) as err:
        writers.write_audio(target, _signal(0.5), 48000, subtype="PCM_16")
    line = err.value.one_line()
    assert "not enough disk space" in line and target in line
    assert os.listdir(tmp_path) == []


def test_other_write_errors_keep_their_own_words(tmp_path, monkeypatch):
    def failing_write(self, data):
        raise sf.SoundFileError("Unspecified internal error.")

    monkeypatch.setattr(sf.SoundFile, "write", failing_write)
    target = str(tmp_path / "pump_cleaned.wav")
    with pytest.raises(ScalesieveError) as err:
        writers.write_audio(target, _signal(0.5), 48000, subtype="PCM_16")
    assert "Unspecified internal error" in err.value.one_line()
    assert "disk space" not in err.value.one_line()
