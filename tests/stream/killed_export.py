"""A clean in blocks killed while it writes its output, again and again: what must be left.

The command runs in a child process with a budget so low that even a short recording is
cleaned in blocks; it is killed (SIGKILL) a moment after its temporary file appears.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
import time

#: ``python -c KILLED clean ...``: the command line with a 64 KiB budget (blocks always)
KILLED = textwrap.dedent("""
    import sys
    from scalesieve import memory_guard
    from scalesieve.cli import main
    memory_guard.STREAM_ABOVE = 1 << 16
    sys.exit(main(sys.argv[1:]))
""")

#: one thread for the linear algebra, so kills land at comparable moments
ENV = dict(os.environ, OPENBLAS_NUM_THREADS="1")


def clean_command(*args: str) -> list[str]:
    return [sys.executable, "-c", KILLED, "clean", *args]


def first_run(cmd: list[str]) -> float:
    """Run ``cmd`` to its end (it must clean in blocks); the seconds it took."""
    t0 = time.perf_counter()
    done = subprocess.run(cmd, env=ENV, capture_output=True, text=True, timeout=300)
    took = time.perf_counter() - t0
    assert done.returncode == 0, done.stderr
    assert "cleaned in blocks" in done.stderr
    return took


def kill_while_writing(cmd: list[str], took: float, out, old: bytes, folder, keep,
                       extras, intact) -> int:
    """Kill ``cmd`` ``extras`` seconds after its temporary file appears, once per delay.

    Before each run ``out`` holds ``old``; after each kill ``intact()`` must hold and
    ``folder`` may hold only the names in ``keep`` and temporaries.  Returns how many
    kills left a temporary file (landed mid-write).
    """
    torn = 0
    for extra in extras:
        out.write_bytes(old)
        p = subprocess.Popen(cmd, env=ENV, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        # kill while the new file is being written: once its temporary file appears
        deadline = time.monotonic() + 10 * took + 30
        while p.poll() is None and time.monotonic() < deadline:
            if any(".tmp-scalesieve-" in name for name in os.listdir(folder)):
                break
            time.sleep(0.005)
        time.sleep(extra)
        p.send_signal(signal.SIGKILL)
        p.wait()
        assert intact()
        for name in os.listdir(folder):
            assert name in keep or ".tmp-scalesieve-" in name
            torn += ".tmp-scalesieve-" in name
    return torn


def run_again(cmd: list[str]) -> None:
    """After the kills, the command still runs to its end (over the temporaries left)."""
    assert subprocess.run(cmd, env=ENV, capture_output=True, timeout=300).returncode == 0


def killed_audio_clean(folder, src, *options: str) -> None:
    """``clean SRC -o out.wav --force OPTIONS`` killed mid-write five times over an older file.

    Each kill leaves the old bytes or the complete new samples (compared as samples:
    libsndfile stamps a time in the header) and nothing but temporaries beside them; some
    kills land mid-write; a run after them ends with the new file and no temporaries.
    """
    import numpy as np
    import soundfile as sf

    out = folder / "out.wav"
    old = b"an older export"
    cmd = clean_command(str(src), "-o", str(out), "--force", *options)
    took = first_run(cmd)
    whole = sf.read(out, dtype="float32")[0]

    def intact():
        if out.read_bytes() == old:
            return True
        y = sf.read(out, dtype="float32")[0]
        return y.shape == whole.shape and np.array_equal(y, whole)

    torn_temporaries = kill_while_writing(cmd, took, out, old, folder, (src.name, "out.wav"),
                                          (0.0, 0.05, 0.1, 0.2, 0.3), intact)
    assert torn_temporaries >= 1                       # some kills did land mid-write
    run_again(cmd)
    assert intact() and out.read_bytes() != old
    assert sorted(os.listdir(folder)) == sorted([src.name, "out.wav"])
