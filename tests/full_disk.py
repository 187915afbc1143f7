"""A small, really full disk for tests: a tmpfs mounted for the test (Linux, as root).

Where mounting is not permitted the test that asked is skipped; each such test
has a twin that patches the write to raise ENOSPC instead, which runs anywhere.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import subprocess
import sys
import uuid

import pytest


@contextlib.contextmanager
def small_disk(parent, size_bytes: int, read_only: bool = False):
    """A folder on a fresh tmpfs of ``size_bytes`` (``read_only``: mounted so); unmounted after."""
    if not sys.platform.startswith("linux") or os.geteuid() != 0 or not shutil.which("mount"):
        pytest.skip("mounting a small tmpfs needs Linux and root")
    folder = os.path.join(os.fspath(parent), f"small-disk-{uuid.uuid4().hex[:6]}")
    os.makedirs(folder)
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", f"size={int(size_bytes)},mode=0777" + (",ro" if read_only else ""),
                           "tmpfs", folder], capture_output=True, text=True)
    if done.returncode != 0:
        os.rmdir(folder)
        pytest.skip(f"cannot mount a tmpfs here: {done.stderr.strip()}")
    try:
        yield folder
    finally:
        subprocess.run(["umount", "-l", folder], capture_output=True)
        with contextlib.suppress(OSError):
            os.rmdir(folder)


def fill(folder: str, leave_bytes: int) -> None:
    """Fill the disk holding ``folder`` up to ``leave_bytes`` of free space."""
    free = shutil.disk_usage(folder).free
    with open(os.path.join(folder, "filler.bin"), "wb") as fh:
        fh.write(b"\0" * max(0, free - leave_bytes))
