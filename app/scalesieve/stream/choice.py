"""Whether a command can run block by block, and about what memory that takes."""

from __future__ import annotations

import os
from typing import Sequence

from scalesieve.core import transforms as tf
from scalesieve.stream.sources import READ_FRAMES

#: band-sized stretches of one channel an SWT in blocks holds at its peak, per block
#: of coefficients (see stream_bytes; fitted to tests/perf/bench_long.py)
SWT_COPIES = 5

#: block-sized stretches of one channel ``events`` in blocks holds per band at its peak, by
#: transform (see events_bytes; fitted to peaks measured as tests/perf/bench_long.py
#: --only events --force-blocks runs the command)
EVENTS_COPIES = {"swt": 6, "dwt": 4}

#: why a measurement format whose library reads it whole is not read in blocks
WHOLE_FORMATS = {
    "MATLAB": "scipy.io reads a MATLAB v5 variable whole (save it as v7.3, which is HDF5, "
              "to have it read in blocks)",
    "BDF": "edfio reads BDF files whole (it loads only EDF lazily)",
    "Excel": "an Excel workbook is read whole, as a text table",
}


def not_streamable(facts: dict | None, spec: tf.TransformSpec, outputs: Sequence[str],
                   fill_gaps: str | None = None, channel=None, swt: bool = False,
                   packets: bool = False) -> str | None:
    """Why a command cannot run block by block, or None when it can.

    Audio files, text tables (CSV, TSV, TXT, DAT: ``stream.text_source``) and
    the measurement formats read by range (TDMS, HDF5, MATLAB v7.3, EDF, MDF, NumPy:
    ``stream.measurement_source``) are read in blocks; ``--fill-gaps`` fills
    them block by block (a text table's clock jumps too).  The SWT runs in blocks in every boundary mode
    (``stream.swt``); ``swt`` is kept for callers that passed it (``events``),
    and ``channel`` too: a channel, by number or by name, is read in blocks.
    Wavelet packets run in blocks for the commands that can take them
    (``packets``: ``bands`` and ``clean``), in every boundary mode
    (``stream.packet_tree``; the wrapping ones through ``stream.packet_wrap``).
    """
    from scalesieve.io.writers import AUDIO_FORMAT_BY_EXTENSION, CSV_EXTENSIONS

    from scalesieve.io.measurement_readers import RANGED

    kind = None if facts is None else facts.get("kind")
    if kind == "measurement" and facts.get("format") not in RANGED:
        fmt = facts.get("format")
        return WHOLE_FORMATS.get(fmt, f"{fmt} files are read whole")
    if kind not in ("audio", "text", "measurement"):
        return ("only audio files (WAV, FLAC, AIFF, ...), text tables and measurement files "
                "(TDMS, HDF5, MATLAB v7.3, EDF, MDF, NumPy) are read in blocks")
    if kind == "audio" and not facts.get("frames_exact"):
        # (a text table's rows are counted as it is parsed in chunks: stream.text_source)
        return "its header's frame count cannot be trusted"
    if spec.kind == "swt":
        pass                   # every mode: the blocks read the circle the model pads
    elif spec.kind == "packet":
        why = packet_refusal(spec, packets)
        if why is not None:
            return why
    elif spec.kind != "dwt":  # pragma: no cover - TransformSpec knows dwt, swt and packet
        return f"the {spec.kind} transform is not worked on in blocks"
    for out in outputs:
        ext = os.path.splitext(out)[1].lower()
        if ext not in AUDIO_FORMAT_BY_EXTENSION and ext not in CSV_EXTENSIONS:
            return f"{os.path.basename(out)}: only audio and CSV outputs are written in blocks"
    return None


def packet_refusal(spec: tf.TransformSpec, bands: bool) -> str | None:
    """Why wavelet packets of ``spec`` cannot run in blocks (``bands``: the command can)."""
    from scalesieve.stream.packet_tree import PACKET_MODES

    if not bands:
        return "wavelet packets are worked on in blocks by bands and clean only"
    if spec.mode not in PACKET_MODES:  # pragma: no cover - TransformSpec checks the mode
        return f"wavelet packets in boundary mode {spec.mode} are not worked on in blocks"
    return None


def stream_bytes(channels: int, spec: tf.TransformSpec, clean: bool = True) -> int:
    """About what a clean in blocks holds, whatever the length (see docs/performance.md).

    ``clean`` False: a command that writes nothing (``bands``), which for
    wavelet packets holds no inverse tree.

    Per channel: blocks of samples and their temporaries, the level-1 input
    history, the coefficients waiting for the inverse (the coarse levels lag
    the input by about MIN_STEP * 2^J samples) and blocks of output, in
    float64; and the interpreter with its libraries (about 85 MiB).  Fitted
    to the peaks tests/perf/bench_long.py measures (see docs/performance.md).
    """
    from scalesieve.stream.dwt import MIN_STEP

    level = spec.level or tf.MAX_DEFAULT_LEVEL
    if spec.kind == "swt":
        from scalesieve.stream.swt import SWT_BLOCK

        # per channel: the forward's window and its level + 1 bands, the inverse's
        # window of level + 1 bands and what pywt.iswt makes of it (see stream.swt)
        reach = 2 * (tf.filter_length(spec.wavelet) - 1) * 2 ** level
        per_channel = 8 * (level + 1) * (SWT_BLOCK + 2 * reach) * SWT_COPIES
        return int(channels * per_channel + 8 * 12 * READ_FRAMES + (96 << 20))
    if spec.kind == "packet":
        # per channel: blocks of samples; at every depth of the tree the blocks its
        # stages hand on and keep (forward and inverse, about one read block's worth
        # per depth, several times over); at every node its stages' histories
        # (stream.packet_tree; the wrapping modes' stages alike, stream.packet_wrap).
        # Fitted to the peaks of clean in blocks, 1 and 2 channels, depths 3, 6 and 8,
        # symmetric and periodization (docs/performance.md).
        nodes = 2 ** (level + 1) - 1
        stages = 4 * nodes * (1024 + MIN_STEP + 2 * tf.filter_length(spec.wavelet))
        if clean:
            per_channel = 8 * (12 * READ_FRAMES + 14 * level * READ_FRAMES + stages)
            return int(channels * per_channel + (96 << 20))
        # bands: the forward tree's blocks only, no output, and a smaller interpreter
        # (fitted alike: tests/stream/test_stream_packets_memory.py holds the peaks)
        per_channel = 8 * (8 * READ_FRAMES + level * READ_FRAMES + stages)
        return int(channels * per_channel + (56 << 20))
    lag = (MIN_STEP + 2 * tf.filter_length(spec.wavelet)) * 2 ** level
    per_channel = 8 * (12 * READ_FRAMES + 4 * lag)
    return int(channels * per_channel + (96 << 20))


def events_bytes(channels: int, spec: tf.TransformSpec, levels: Sequence[int]) -> int:
    """About what ``events`` in blocks holds (``stream.events``), whatever the length.

    It transforms only to its deepest level, one read block at a time: per
    channel, that level's bands and the approximation, each a block wide plus
    the deepest coefficient's reach, a few times over; and the interpreter with
    its libraries (about 96 MiB, as in :func:`stream_bytes`).  No inverse, so
    nothing waits for the coarse levels.  Measured peaks (2**24 float32 samples, one
    and two channels, SWT and DWT, levels 1-2 to 1-12) lie at most 1.6 times below it
    (tests/cli/test_events_memory.py holds them).
    """
    top = max(levels)
    reach = (tf.filter_length(spec.wavelet) - 1) * (2 ** top - 1) + 1
    per_channel = 8 * EVENTS_COPIES[spec.kind] * (top + 1) * (READ_FRAMES + reach)
    return int(channels * per_channel + (96 << 20))
