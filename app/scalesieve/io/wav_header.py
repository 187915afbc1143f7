"""What a WAV (RIFF, RIFX, RF64) header declares, read from its chunks.

libsndfile quietly shortens a file whose data chunk ends early to what it
holds; the declared size, compared with what was read, tells the user that
the recording is incomplete.
"""

from __future__ import annotations

import struct

# Chunks walked before giving up (a damaged file may hold garbage sizes).
_MOST_CHUNKS = 64
# Format tags whose frames are a fixed number of bytes: PCM, IEEE float, A-law,
# u-law, WAVE_FORMAT_EXTENSIBLE (Microsoft's WAVE format registration).
_PLAIN_TAGS = (1, 3, 6, 7, 0xFFFE)


def _walk(path: str):
    """The header's facts up to its data chunk: ``(byte order, fmt, data offset, data size)``.

    ``fmt`` is ``(format tag, sub-format tag, channels, bits)`` or ``None`` when
    no ``fmt `` chunk came before the data (the sub-format tag is the
    WAVE_FORMAT_EXTENSIBLE GUID's, else the tag itself); the data size is the
    ``ds64`` chunk's for RF64. ``None`` for a file that is no WAV or whose chunks
    end first. Never raises on a damaged file.
    """
    try:
        with open(path, "rb") as fh:
            head = fh.read(12)
            if len(head) < 12 or head[8:12] != b"WAVE" or \
                    head[:4] not in (b"RIFF", b"RIFX", b"RF64", b"BW64"):
                return None
            end = ">" if head[:4] == b"RIFX" else "<"
            fmt = None
            ds64_data = None
            for _ in range(_MOST_CHUNKS):
                ch = fh.read(8)
                if len(ch) < 8:
                    return None
                cid = ch[:4]
                (chunk,) = struct.unpack(end + "I", ch[4:])
                if cid == b"fmt ":
                    body = fh.read(min(chunk, 64))
                    if len(body) < 16:
                        return None
                    tag, channels = struct.unpack(end + "HH", body[:4])
                    bits = struct.unpack(end + "H", body[14:16])[0]
                    sub = tag
                    if tag == 0xFFFE and len(body) >= 26:
                        sub = struct.unpack(end + "H", body[24:26])[0]   # the sub-format GUID
                    fmt = (tag, sub, channels, bits)
                    fh.seek(chunk - len(body) + (chunk & 1), 1)
                elif cid == b"ds64":
                    body = fh.read(min(chunk, 28))
                    if len(body) >= 16:
                        ds64_data = struct.unpack("<Q", body[8:16])[0]
                    fh.seek(chunk - len(body) + (chunk & 1), 1)
                elif cid == b"data":
                    if chunk == 0xFFFFFFFF and ds64_data is not None:
                        chunk = ds64_data
                    return end, fmt, fh.tell(), chunk
                else:
                    fh.seek(chunk + (chunk & 1), 1)
    except (OSError, struct.error, ValueError):
        return None
    return None


def declared_frames(path: str) -> int | None:
    """Frames the header's data chunk declares, or ``None`` when it cannot tell.

    Reads only the chunk headers (``fmt `` for the bytes per frame, ``ds64``
    for RF64 sizes, ``data`` for the size). Never raises on a damaged file.
    """
    found = _walk(path)
    if found is None or found[1] is None:
        return None
    tag, _sub, channels, bits = found[1]
    if tag not in _PLAIN_TAGS:
        return None  # compressed: frames do not follow from bytes
    # from channels and sample width: some writers get block_align wrong
    block_align = channels * ((bits + 7) // 8)
    if not block_align:
        return None
    return int(found[3] // block_align)


#: sample layouts a memory map can read as they are: (format tag, bits) -> (numpy kind, scale);
#: integer PCM scaled to [-1, 1) as libsndfile reads it (divided by 2^(bits-1))
_MAPPED = {(1, 16): ("i2", 2.0 ** 15), (1, 24): ("i3", 2.0 ** 23), (1, 32): ("i4", 2.0 ** 31),
           (3, 32): ("f4", 1.0), (3, 64): ("f8", 1.0)}


def data_layout(path: str) -> dict | None:
    """Where a WAV's samples lie and how they are stored, or ``None`` when a map cannot read them.

    Returns ``{"offset", "frames", "channels", "kind", "scale", "byteorder"}``
    for 16-, 24- and 32-bit integer PCM and 32- and 64-bit float (``kind``
    ``i2``, ``i3``, ``i4``, ``f4``, ``f8``; integers are divided by ``scale``);
    the frames are those the file holds, never more than its header declares.
    Never raises on a damaged file.
    """
    import os

    found = _walk(path)
    if found is None or found[1] is None:
        return None
    end, (_tag, tag, channels, bits), offset, chunk = found
    if (tag, bits) not in _MAPPED or channels < 1:
        return None
    try:
        size = os.path.getsize(path)
    except OSError:
        return None
    kind, scale = _MAPPED[(tag, bits)]
    frame = channels * (bits // 8)
    frames = min(chunk, max(0, size - offset)) // frame
    return {"offset": offset, "frames": int(frames), "channels": int(channels),
            "kind": kind, "scale": scale, "byteorder": "big" if end == ">" else "little"}
