"""The window's and the commands' processes ask glibc to keep freed working arrays for reuse."""

import platform
import sys

import pytest

from scalesieve import freed_memory


@pytest.mark.skipif(not sys.platform.startswith("linux") or platform.libc_ver()[0] != "glibc",
                    reason="a glibc setting")
def test_glibc_takes_the_settings():
    # glibc refuses an mmap threshold above HEAP_MAX_SIZE / 2 (32 MiB on 64-bit
    # systems; from memory): mallopt then returns 0 and this would say False.
    assert freed_memory.MMAP_THRESHOLD <= 32 << 20
    assert freed_memory.keep_freed_memory() is True


def test_elsewhere_it_does_nothing(monkeypatch):
    monkeypatch.setattr(sys, "platform", "win32")
    assert freed_memory.keep_freed_memory() is False


def test_a_command_asks_for_it_and_the_api_does_not(tmp_path, monkeypatch):
    import numpy as np
    import soundfile as sf

    from scalesieve import api, cli

    calls = []
    monkeypatch.setattr(freed_memory, "keep_freed_memory", lambda: calls.append(1) or True)
    src = tmp_path / "in.wav"
    sf.write(src, 0.1 * np.sin(np.arange(4000) / 7.0), 8000, subtype="FLOAT")
    api.clean(src, tmp_path / "a.wav", edits=[api.Edit("gain", levels=(1,), gain=0.0)])
    assert calls == []
    assert cli.main(["bands", str(src)]) == 0
    assert calls == [1]
