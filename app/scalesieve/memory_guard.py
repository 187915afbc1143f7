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


def _size(b: float) -> str:
    """Bytes as the guard's messages say them: GiB from 1 GiB on, MiB below."""
    return f"{b / 2**30:.1f} GiB" if b >= 2**30 else f"{max(b / 2**20, 1):.0f} MiB"


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
    ``STREAM_ABOVE`` (or than is ``available``, default :func:`available_memory`)
    and the blocks can do it;
    ``(False, reason)`` when they cannot (``reason`` None: no need).
    ``swt``: the command takes the SWT in blocks too (``events``);
    ``packets``: it takes wavelet packets in blocks (``bands``).
    """
    from scalesieve.core.transforms import TransformSpec
    from scalesieve.stream.choice import not_streamable

    if facts is None or facts.get("frames") is None:
        return False, None
    spec = transform or TransformSpec()
    if available is None:
        available = available_memory()
    limit = min(STREAM_ABOVE, available)
    if estimate(facts, channel=channel, transform=spec) <= limit:
        return False, None
    spec = _with_level(spec, int(facts["frames"]))
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
        Given (empty for ``bands``, the files a clean will write) when the
        command can work block by block: a recording past ``STREAM_ABOVE``
        or too long for memory is then not refused when the blocks can do
        it, and the facts say ``"in_blocks"`` (see :func:`weigh`).
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
    from scalesieve.io.readers import TEXT_EXTENSIONS

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
    facts = probe_quietly(source)
    if facts is None:
        return None
    return weigh(facts, source, channel=channel, dtype=dtype, transform=transform,
                 available=available, outputs=outputs, fill_gaps=fill_gaps, packets=packets)


def weigh(facts: dict, source: str, *, channel=None, dtype=np.float64, transform=None,
          available: int | None = None, outputs=None, fill_gaps: str | None = None,
          packets: bool = False, levels=None) -> dict:
    """:func:`check` on facts already probed: whole, in blocks, or refused.

    ``levels``: the detail levels ``events`` searches (its blocks hold the
    bands to the deepest of them and no inverse: ``stream.choice.events_bytes``);
    otherwise the blocks cost what a clean holds (``outputs`` not empty) or
    what ``bands`` holds (``stream.choice.stream_bytes``).

    When the work runs block by block the facts gain ``"in_blocks"``:
    ``{"bytes": ..., "whole_bytes": ..., "available_bytes": ...}`` (what the
    blocks take, what the whole-array work would, the memory free); its
    :func:`blocks_reason` says why, for the command's note.
    """
    if available is None:
        available = available_memory()
    spec = transform or _default_spec()
    need = estimate(facts, channel=channel, dtype=dtype, transform=spec)
    facts = dict(facts, needed_bytes=need, available_bytes=int(available))
    blocks, why = (False, None) if outputs is None else in_blocks(
        facts, channel=channel, transform=spec, outputs=outputs, fill_gaps=fill_gaps,
        available=available, packets=packets)
    if blocks:
        chans = 1 if channel is not None else int(facts["channels"])
        resolved = _with_level(spec, int(facts["frames"]))
        cost = _blocks_bytes(chans, resolved, outputs, levels)
        if cost > available and need <= available:
            return facts        # past the budget, but it fits whole where blocks would not
        facts["in_blocks"] = {"bytes": cost, "whole_bytes": need,
                              "available_bytes": int(available)}
        if cost <= available:
            return facts
        raise ScalesieveError(_refusal_in_blocks(facts, resolved, cost, int(available),
                                                 channel, outputs, levels), source=source)
    if need <= available:
        return facts
    chans = int(facts["channels"]) if channel is None else 1
    frames = min(int(facts["frames"]), int(facts.get("frames_at_most") or facts["frames"]))
    what = (f"{frames:,} samples x {chans} channel{'s' if chans > 1 else ''} "
            f"in {np.dtype(dtype).name}")
    ways = []
    if channel is None and int(facts["channels"]) > 1:
        one = estimate(facts, channel=0, dtype=dtype, transform=spec)
        ways.append(f"one channel (--channel K) needs about {_size(one)}")
    if np.dtype(dtype) == np.float64:
        half = estimate(facts, channel=channel, dtype=np.float32, transform=spec)
        ways.append(f"float32 samples (scalesieve.api.load(path, dtype=numpy.float32)) "
                    f"need about {_size(half)}")
    if spec.kind == "swt":
        from dataclasses import replace

        dwt = estimate(facts, channel=channel, dtype=dtype, transform=replace(spec, kind="dwt"))
        ways.append(f"the DWT (--transform dwt) needs about {_size(dwt)}")
    if why is not None:
        ways.append(f"it cannot be worked on in blocks ({why})")
    ways.append("or cut the recording into shorter files")
    raise ScalesieveError(
        f"needs about {_size(need)} of memory ({what}), but only {_size(available)} is "
        f"available; " + "; ".join(ways), source=source)


def blocks_reason(facts: dict) -> str:
    """Why the facts' recording is worked on in blocks, for the command's note."""
    blocks = facts["in_blocks"]
    whole, free = blocks["whole_bytes"], blocks["available_bytes"]
    if whole > free:
        return f"whole it would need about {_size(whole)}, more than the {_size(free)} free"
    return (f"whole it would need about {_size(whole)}, more than the "
            f"{_size(STREAM_ABOVE)} a command holds at most")


def _blocks_bytes(channels: int, spec, outputs, levels) -> int:
    """What the command's blocks hold: ``events`` (``levels``), a clean or ``bands``."""
    from scalesieve.stream.choice import events_bytes, stream_bytes

    if levels is not None:
        return events_bytes(channels, spec, levels)
    return stream_bytes(channels, spec, clean=bool(outputs))


def _refusal_in_blocks(facts: dict, spec, cost: int, available: int, channel, outputs,
                       levels) -> str:
    """What a command too large even in blocks says: the figure, and what needs less."""
    from dataclasses import replace

    chans = 1 if channel is not None else int(facts["channels"])
    ways = []
    if chans > 1:
        one = _blocks_bytes(1, spec, outputs, levels)
        ways.append(f"one channel at a time (--channel K) about {_size(one)}")
    if spec.kind == "swt":
        dwt = _blocks_bytes(chans, replace(spec, kind="dwt"), outputs, levels)
        if dwt < cost:
            ways.append(f"the DWT (--transform dwt) about {_size(dwt)}")
    if levels is not None and max(levels) > 2:
        fine = _blocks_bytes(chans, spec, outputs, [1, 2])
        ways.append(f"levels 1 and 2 only (--levels 1,2) about {_size(fine)}")
    elif levels is None and spec.level is not None and spec.level > 4:
        fewer = _blocks_bytes(chans, replace(spec, level=4), outputs, levels)
        if fewer < cost:
            ways.append(f"4 levels (--level 4) about {_size(fewer)}")
    less = f"these need less: {', '.join(ways)}; or " if ways else ""
    return (f"needs about {_size(cost)} of memory even in blocks, but only "
            f"{_size(available)} is available; {less}close other programs to free memory")


def _with_level(spec, frames: int):
    """``spec`` with its level as the work will choose it for ``frames`` samples."""
    if spec.level is not None:
        return spec
    from dataclasses import replace

    from scalesieve.core import transforms as tf

    frames = max(frames, 2)
    if spec.kind == "packet":
        from scalesieve.core import packets as wp

        return replace(spec, level=wp.default_depth(frames, spec.wavelet))
    return replace(spec, level=tf.default_level(frames, spec.wavelet))


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
        available = available_memory()
    limit = min(WINDOW_ABOVE if budget is None else int(budget), available)
    return estimate(facts, channel=channel, transform=transform) > limit
