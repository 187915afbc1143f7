"""Refuse, before reading it, a recording that would not fit in memory.

The estimate follows what the decomposition model holds (see the docstring
of ``scalesieve.model``): the recording's samples, and for each channel its
coefficients, the cleaned signal and one cached band component, plus the
temporaries of one edit; the undecimated transform keeps every level at
full length.  Text tables also need their text while they are parsed.
Better to say so in one line than to drive the machine into swap.
"""

from __future__ import annotations

import os

import numpy as np

from scalesieve.errors import ScalesieveError

#: full-length copies of one channel a DWT model holds (coefficients, cleaned,
#: one cached component), beyond the samples themselves
DWT_COPIES = 3
#: full-length temporaries of one edit, for one channel at a time
EDIT_TEMPORARIES = 1
#: bytes held per byte of a text table while it is parsed (bytes read, decoded text, cells)
TEXT_FACTOR = 3
#: the interpreter, NumPy, PyWavelets and the model's small parts (bytes)
BASE_BYTES = 64 << 20
#: a command whose whole-array work would need more than this runs block by block,
#: where it can (see scalesieve.stream): the budget a long recording is held to
STREAM_ABOVE = 1 << 30


def _gib(b: float) -> str:
    return f"{b / 2**30:.1f} GiB"


def estimate(facts: dict, *, channel: int | None = None, dtype=np.float64,
             transform=None) -> int:
    """Bytes a model of the recording ``facts`` describes will need at its peak.

    Parameters
    ----------
    facts : dict
        As ``scalesieve.io.readers.probe`` returns them (``frames``,
        ``channels``, ``kind``, ``file_bytes``; ``frames_at_most`` bounds
        ``frames`` when given).
    channel : int, optional
        Only this channel is loaded.
    dtype : float64 or float32
        The samples' (and so the model's) precision.
    transform : TransformSpec, optional
        ``kind="swt"`` keeps ``level + 1`` full-length bands per channel
        (level chosen for the data when not given); default the DWT.
    """
    from scalesieve.core import transforms as tf

    n = int(facts["frames"])
    if facts.get("frames_at_most") is not None:
        # a damaged header may claim more than the file can hold; reading will not trust it
        n = min(n, int(facts["frames_at_most"]))
    chans = 1 if channel is not None else max(1, int(facts["channels"]))
    item = np.dtype(dtype).itemsize
    one = n * item
    per_channel = DWT_COPIES * one
    temporaries = EDIT_TEMPORARIES * one
    if transform is not None and transform.kind == "swt":
        wavelet = transform.wavelet
        level = transform.level or tf.default_level(max(n, 2), wavelet)
        padded = tf.swt_padded_length(n, level) * item
        # every level at full length, and as many again while a change is synthesised
        per_channel = (level + 1) * padded + 2 * one
        temporaries = (level + 1) * padded
    need = chans * one + chans * per_channel + temporaries + BASE_BYTES
    if facts.get("kind") == "text":
        need += TEXT_FACTOR * int(facts.get("file_bytes") or 0)
    elif facts.get("kind") == "measurement":
        # the format's library holds its own copy while it reads (a spreadsheet far more)
        factor = TEXT_FACTOR * 4 if facts.get("format") == "Excel" else 1
        need += factor * int(facts.get("file_bytes") or 0)
    return int(need)


def available_memory() -> int:
    """Bytes of memory a new allocation can have without swapping, as psutil counts them.

    On Linux that is the kernel's own estimate, ``MemAvailable`` in
    ``/proc/meminfo`` (what ``psutil.virtual_memory().available`` reads there),
    read directly: importing psutil costs a short command more than the reading.
    Elsewhere, or on a kernel without that line, psutil's figure.
    """
    try:
        with open("/proc/meminfo", "rb") as fh:
            for line in fh:
                if line.startswith(b"MemAvailable:"):
                    return int(line.split()[1]) * 1024      # the kernel writes kB
    except (OSError, ValueError, IndexError):
        pass
    import psutil

    return int(psutil.virtual_memory().available)


def probe_quietly(path: str | os.PathLike) -> dict | None:
    """The facts of a recording (a text table's from its first rows: ``frames`` estimated),
    or None (a file reading will refuse)."""
    from scalesieve.io.readers import probe

    source = os.fspath(path)
    try:
        return probe(source)
    except ScalesieveError:
        return None


def in_blocks(facts: dict | None, *, channel=None, transform=None, outputs=(),
              fill_gaps=None, available: int | None = None,
              swt: bool = False, packets: bool = False) -> tuple[bool, str | None]:
    """Whether a clean of ``facts`` runs block by block, and why not when it cannot.

    Returns ``(True, None)`` when the whole-array work would need more than
    ``STREAM_ABOVE`` (or than is ``available``) and the blocks can do it;
    ``(False, reason)`` when they cannot (``reason`` None: no need).
    ``swt``: the command takes the SWT in blocks too (``events``);
    ``packets``: it takes wavelet packets in blocks (``bands``).
    """
    from scalesieve.core.transforms import TransformSpec
    from scalesieve.stream.choice import not_streamable

    if facts is None or facts.get("frames") is None:
        return False, None
    spec = transform or TransformSpec()
    limit = STREAM_ABOVE if available is None else min(STREAM_ABOVE, available)
    if estimate(facts, channel=channel, transform=spec) <= limit:
        return False, None
    if spec.level is None:
        from dataclasses import replace

        from scalesieve.core import transforms as tf

        frames = max(int(facts["frames"]), 2)
        if spec.kind == "packet":
            from scalesieve.core import packets as wp

            spec = replace(spec, level=wp.default_depth(frames, spec.wavelet))
        else:
            spec = replace(spec, level=tf.default_level(frames, spec.wavelet))
    why = not_streamable(facts, spec, list(outputs), fill_gaps, channel, swt, packets)
    return why is None, why


def check(path: str | os.PathLike, *, channel: int | None = None, dtype=np.float64,
          transform=None, available: int | None = None, outputs=None,
          fill_gaps: str | None = None, packets: bool = False) -> dict:
    """Probe ``path`` and refuse it when its model would need more memory than is free.

    Parameters
    ----------
    path : str or os.PathLike
    channel, dtype, transform
        As for ``estimate``.
    available : int, optional
        Bytes free; default :func:`available_memory`.

    outputs : list of str, optional
        Given (empty for ``bands`` and ``events``, the files a clean will
        write) when the command can work block by block: a recording past
        ``STREAM_ABOVE`` or too long for memory is then not refused when the
        blocks can do it, and the facts say ``"in_blocks": {"bytes": ...}``
        (about what that takes).
    packets : bool
        The command takes wavelet packets in blocks (``bands``).

    Returns
    -------
    dict or None
        The probe's facts, with ``needed_bytes`` and ``available_bytes``;
        None when the file was not probed: a text table small enough that
        even one value per byte would fit (parsing it twice is not worth it),
        or a file that cannot be probed (reading it will say what is wrong,
        in the reader's own words).

    Raises
    ------
    ScalesieveError
        Naming how much is needed and what would need less (one channel,
        float32 samples, the DWT instead of the SWT).
    """
    from scalesieve.io.readers import TEXT_EXTENSIONS, probe

    if available is None:
        available = available_memory()
    source = os.fspath(path)
    if os.path.splitext(source)[1].lower() in TEXT_EXTENSIONS:
        try:
            size = os.path.getsize(source)
        except OSError:
            return None
        bound = {"frames": size, "channels": 1, "kind": "text", "file_bytes": size}
        # a command that can work in blocks (outputs given) does so past STREAM_ABOVE
        room = available if outputs is None else min(available, STREAM_ABOVE)
        if estimate(bound, dtype=dtype, transform=transform) <= room:
            return None
    try:
        facts = probe(source)
    except ScalesieveError:
        return None
    need = estimate(facts, channel=channel, dtype=dtype, transform=transform)
    facts = dict(facts, needed_bytes=need, available_bytes=int(available))
    blocks, why = (False, None) if outputs is None else in_blocks(
        facts, channel=channel, transform=transform, outputs=outputs, fill_gaps=fill_gaps,
        available=available, packets=packets)
    if blocks:
        from scalesieve.stream.choice import stream_bytes

        chans = 1 if channel is not None else int(facts["channels"])
        cost = stream_bytes(chans, transform or _default_spec(), clean=bool(outputs))
        facts["in_blocks"] = {"bytes": cost}
        if cost <= available:
            return facts
        raise ScalesieveError(
            f"needs about {_gib(cost)} of memory even in blocks, but only "
            f"{_gib(available)} is available; close other programs or clean one channel "
            "at a time (--channel K)", source=source)
    if need <= available:
        return facts
    chans = int(facts["channels"]) if channel is None else 1
    frames = min(int(facts["frames"]), int(facts.get("frames_at_most") or facts["frames"]))
    what = (f"{frames:,} samples x {chans} channel{'s' if chans > 1 else ''} "
            f"in {np.dtype(dtype).name}")
    ways = []
    if channel is None and int(facts["channels"]) > 1:
        one = estimate(facts, channel=0, dtype=dtype, transform=transform)
        ways.append(f"one channel (--channel K) needs about {_gib(one)}")
    if np.dtype(dtype) == np.float64:
        half = estimate(facts, channel=channel, dtype=np.float32, transform=transform)
        ways.append(f"float32 samples (scalesieve.api.load(path, dtype=numpy.float32)) "
                    f"need about {_gib(half)}")
    if transform is not None and transform.kind == "swt":
        from dataclasses import replace

        dwt = estimate(facts, channel=channel, dtype=dtype,
                       transform=replace(transform, kind="dwt"))
        ways.append(f"the DWT (--transform dwt) needs about {_gib(dwt)}")
    if why is not None:
        ways.append(f"it cannot be worked on in blocks ({why})")
    ways.append("or cut the recording into shorter files")
    raise ScalesieveError(
        f"needs about {_gib(need)} of memory ({what}), but only {_gib(available)} is "
        f"available; " + "; ".join(ways), source=os.fspath(path))


def _default_spec():
    from scalesieve.core.transforms import TransformSpec

    return TransformSpec()


#: bytes of in-memory model above which the window shows a recording in long-recording mode
WINDOW_ABOVE = STREAM_ABOVE


def window_long(facts: dict | None, *, channel=None, transform=None,
                budget: int | None = None, available: int | None = None) -> bool:
    """Whether the window should show ``facts``'s recording in long-recording mode.

    True when the in-memory model (``estimate``) would need more than
    ``budget`` (default ``WINDOW_ABOVE``) or than is ``available`` (default
    the memory free): the window then reads the file on demand and draws
    from its summary (``scalesieve.longview``).  False for a file that was
    not probed (a text table: read whole, as before).
    """
    if facts is None or facts.get("frames") is None or facts.get("kind") != "audio":
        return False
    if available is None:
        import psutil

        available = int(psutil.virtual_memory().available)
    limit = min(WINDOW_ABOVE if budget is None else int(budget), available)
    return estimate(facts, channel=channel, transform=transform) > limit
