"""The memory guard: refuse, before reading, what would not fit; say what would."""

import re
import wave

import numpy as np
import pytest

from scalesieve import memory_guard
from scalesieve.cli import main
from scalesieve.core.transforms import TransformSpec
from scalesieve.errors import ScalesieveError


def _wav16(path, frames, channels=1, rate=8000):
    # written with Python's own wave module: 16-bit PCM
    pcm = np.zeros(frames * channels, dtype="<i2")
    with wave.open(str(path), "wb") as w:
        w.setnchannels(channels)
        w.setsampwidth(2)
        w.setframerate(rate)
        w.writeframes(pcm.tobytes())


def test_refuses_naming_need_and_ways(tmp_path):
    f = tmp_path / "two.wav"
    _wav16(f, 50000, channels=2)
    facts = memory_guard.check(f)                      # this machine has room for it
    assert facts["frames"] == 50000 and facts["needed_bytes"] > 50000 * 2 * 8
    with pytest.raises(ScalesieveError) as err:
        memory_guard.check(f, available=1 << 20)
    msg = err.value.one_line()
    assert str(f) in msg
    # figures under 1 GiB in MiB (a "0.0 GiB available" said nothing)
    assert re.search(r"needs about \d+ MiB of memory", msg) and "only 1 MiB is available" in msg
    assert "--channel K" in msg and "float32" in msg


def test_ways_that_need_less_need_less(tmp_path):
    f = tmp_path / "two.wav"
    _wav16(f, 1000, channels=2)
    facts = memory_guard.check(f)
    full = memory_guard.estimate(facts)
    assert memory_guard.estimate(facts, channel=0) < full
    assert memory_guard.estimate(facts, dtype=np.float32) < full
    swt = memory_guard.estimate(facts, transform=TransformSpec("swt", "db4", 5))
    assert swt > full
    with pytest.raises(ScalesieveError, match="--transform dwt"):
        memory_guard.check(f, transform=TransformSpec("swt", "db4", 5), available=swt - 1)


def test_small_text_and_unreadable_files_are_left_to_the_reader(tmp_path):
    t = tmp_path / "log.csv"
    t.write_text("time_s;a\n0;1,5\n0,001;2,5\n")
    assert memory_guard.check(t) is None
    assert memory_guard.check(tmp_path / "missing.wav") is None


def test_command_line_refuses_in_one_line(tmp_path, monkeypatch, capsys):
    f = tmp_path / "long.wav"
    _wav16(f, 20000)

    class Tight:
        available = 1 << 20

    monkeypatch.setattr(memory_guard, "available_memory", lambda: Tight.available)
    assert main(["bands", str(f)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith(f"scalesieve: error: {f}: needs about")
    out = tmp_path / "out.wav"
    assert main(["clean", str(f), "-o", str(out), "--zero", "1"]) == 2
    assert "needs about" in capsys.readouterr().err
    assert not out.exists()


def test_a_header_claiming_more_than_the_file_holds_is_not_believed():
    # readers.probe: frames_at_most is what the file can hold; reading trusts that.
    facts = {"frames": 10**12, "frames_at_most": 1000, "channels": 1, "kind": "audio",
             "file_bytes": 2000}
    assert memory_guard.estimate(facts) == memory_guard.estimate(dict(facts, frames=1000))


def test_available_memory_is_the_figure_psutil_gives():
    # Reference: psutil.virtual_memory().available, which on Linux is the kernel's
    # MemAvailable; both are read a moment apart, so they may differ by what other
    # processes did meanwhile (allowed: 5 % of the memory, "common practice" slack).
    psutil = pytest.importorskip("psutil")
    ours = memory_guard.available_memory()
    theirs = int(psutil.virtual_memory().available)
    total = int(psutil.virtual_memory().total)
    assert isinstance(ours, int) and ours > 0
    assert abs(ours - theirs) <= 0.05 * total


def test_available_memory_without_proc_meminfo_asks_psutil(monkeypatch):
    psutil = pytest.importorskip("psutil")
    import builtins

    real_open = builtins.open

    def no_meminfo(path, *a, **k):
        if str(path) == "/proc/meminfo":
            raise FileNotFoundError(path)
        return real_open(path, *a, **k)

    class Known:
        available = 123 << 20

    monkeypatch.setattr(builtins, "open", no_meminfo)
    monkeypatch.setattr(psutil, "virtual_memory", lambda: Known())
    assert memory_guard.available_memory() == 123 << 20
