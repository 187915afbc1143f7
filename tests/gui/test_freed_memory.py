"""The window's process asks glibc to keep freed working arrays for reuse."""

import platform
import sys

import pytest

from scalesieve.gui import freed_memory


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
