"""The memory wavelet packets in blocks say they need is about what they hold.

The figures are peak resident memory (``ru_maxrss`` from ``os.wait4``, the parent kept
small: a child's figure starts from its parent's size at the fork) of ``clean
--threshold universal`` and ``bands --json`` with ``--transform packet --level J``,
forced into blocks (``memory_guard.STREAM_ABOVE = 0``, as tests/perf/bench_long.py
--force-blocks runs them), on 2**22 float32 samples per channel of invented noise at
51200 Hz, db4, measured on this machine (2 cores shared, load 7-10) on 2026-12-03.  In
blocks the peak does not grow with the length (docs/performance.md: the same at 2**28).
The estimate must not fall below a measured peak, nor lie more than 1.7 times above it.
"""

from __future__ import annotations

import pytest

from scalesieve.core.transforms import TransformSpec
from scalesieve.stream.choice import stream_bytes

#: (command, mode, depth, channels, measured peak MiB), measured on this machine
MEASURED = [
    ("clean", "periodization", 3, 1, 152.8), ("clean", "periodization", 3, 2, 232.1),
    ("clean", "periodization", 6, 1, 219.7), ("clean", "periodization", 6, 2, 391.2),
    ("clean", "periodization", 8, 1, 275.2), ("clean", "periodization", 8, 2, 509.4),
    ("clean", "symmetric", 3, 1, 145.8), ("clean", "symmetric", 3, 2, 233.7),
    ("clean", "symmetric", 8, 1, 314.4), ("clean", "symmetric", 8, 2, 587.9),
    ("clean", "periodic", 3, 1, 145.0), ("clean", "periodic", 3, 2, 226.4),
    ("clean", "periodic", 8, 1, 310.7), ("clean", "periodic", 8, 2, 584.0),
    ("bands", "periodization", 3, 1, 65.8), ("bands", "periodization", 3, 2, 83.8),
    ("bands", "periodization", 6, 1, 72.9), ("bands", "periodization", 6, 2, 103.2),
    ("bands", "periodization", 8, 1, 85.1), ("bands", "periodization", 8, 2, 130.6),
    ("bands", "symmetric", 3, 1, 68.0), ("bands", "symmetric", 3, 2, 82.4),
    ("bands", "symmetric", 8, 1, 81.5), ("bands", "symmetric", 8, 2, 122.6),
    ("bands", "periodic", 3, 1, 63.0), ("bands", "periodic", 3, 2, 73.1),
    ("bands", "periodic", 8, 1, 72.6), ("bands", "periodic", 8, 2, 104.8),
]


@pytest.mark.parametrize("command, mode, depth, channels, peak_mib", MEASURED)
def test_the_estimate_is_within_its_factor_of_the_measured_peak(command, mode, depth,
                                                                 channels, peak_mib):
    spec = TransformSpec(kind="packet", wavelet="db4", level=depth, mode=mode)
    est = stream_bytes(channels, spec, clean=command == "clean") / 2**20
    assert peak_mib <= est <= 1.7 * peak_mib, (est, peak_mib)
