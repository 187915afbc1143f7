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


def check(path: str | os.PathLike, *, channel: int | None = None, dtype=np.float64,
          transform=None, available: int | None = None) -> dict:
    """Probe ``path`` and refuse it when its model would need more memory than is free.

    Parameters
    ----------
    path : str or os.PathLike
    channel, dtype, transform
        As for ``estimate``.
    available : int, optional
        Bytes free; default ``psutil.virtual_memory().available``.

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
    import psutil

    from scalesieve.io.readers import TEXT_EXTENSIONS, probe

    if available is None:
        available = int(psutil.virtual_memory().available)
    source = os.fspath(path)
    if os.path.splitext(source)[1].lower() in TEXT_EXTENSIONS:
        try:
            size = os.path.getsize(source)
        except OSError:
            return None
        bound = {"frames": size, "channels": 1, "kind": "text", "file_bytes": size}
        if estimate(bound, dtype=dtype, transform=transform) <= available:
            return None
    try:
        facts = probe(source)
    except ScalesieveError:
        return None
    need = estimate(facts, channel=channel, dtype=dtype, transform=transform)
    facts = dict(facts, needed_bytes=need, available_bytes=int(available))
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
    ways.append("or cut the recording into shorter files")
    raise ScalesieveError(
        f"needs about {_gib(need)} of memory ({what}), but only {_gib(available)} is "
        f"available; " + "; ".join(ways), source=os.fspath(path))
