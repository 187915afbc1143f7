"""The memory `events` in blocks says it needs is about what it holds.

The figures are peak resident memory (``ru_maxrss`` from ``os.wait4``) of the command
forced into blocks (``memory_guard.STREAM_ABOVE = 0``, as tests/perf/bench_long.py
--force-blocks runs it) on the benchmark's invented vibration recording, float32 WAV at
51200 Hz, measured on this machine (2 cores, load about 2.6) on 2026-12-03.  The estimate
must not fall below a measured peak, nor lie more than 1.6 times above it.
"""

from __future__ import annotations

import os
import re

import numpy as np
import pytest
import soundfile as sf

from scalesieve import memory_guard
from scalesieve.cli import main
from scalesieve.core.transforms import TransformSpec
from scalesieve.stream.choice import events_bytes

#: (channels, transform, deepest level, measured peak MiB), measured on this machine
#: (2**24 samples per channel for one channel, 2**23 for two; db4; levels 1..deepest)
MEASURED = [
    (1, "swt", 2, 100.1), (1, "swt", 4, 116.0), (1, "swt", 8, 164.7),
    (1, "swt", 10, 189.5), (1, "swt", 12, 216.9),
    (1, "dwt", 2, 83.0), (1, "dwt", 6, 116.5), (1, "dwt", 10, 149.1),
    (2, "swt", 2, 124.0), (2, "dwt", 6, 176.4),
]


@pytest.mark.parametrize("channels, kind, top, peak_mib", MEASURED)
def test_the_estimate_is_within_its_factor_of_the_measured_peak(channels, kind, top, peak_mib):
    spec = TransformSpec(kind=kind, wavelet="db4", level=12)
    est = events_bytes(channels, spec, list(range(1, top + 1))) / 2**20
    assert peak_mib <= est <= 1.6 * peak_mib, (est, peak_mib)


def test_the_note_says_the_events_estimate(tmp_path, capsys, monkeypatch):
    # a short invented recording forced into blocks: the note's figure is events_bytes
    rng = np.random.default_rng(3)
    path = tmp_path / "clicks.wav"
    sf.write(path, (0.05 * rng.standard_normal(1 << 16)).astype(np.float32), 8000,
             subtype="FLOAT")
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 0)
    assert main(["events", str(path), "--json", "--levels", "1-3"]) == 0
    note = [ln for ln in capsys.readouterr().err.splitlines() if "MiB of memory" in ln]
    assert len(note) == 1, note
    said = int(re.search(r"about (\d+) MiB", note[0]).group(1))
    # the command's own spec: its options parsed as the command line gives them
    import argparse

    from scalesieve.commands import events as command
    from scalesieve.stream.choice import stream_bytes

    p = argparse.ArgumentParser()
    command.configure(p)
    args = p.parse_args([str(path), "--levels", "1-3"])
    spec = command.spec_from(args, 1 << 16)
    assert said == round(events_bytes(1, spec, [1, 2, 3]) / 2**20)
    assert said < stream_bytes(1, spec) / 2**20  # the clean's figure, which it said before
