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


def declared_frames(path: str) -> int | None:
    """Frames the header's data chunk declares, or ``None`` when it cannot tell.

    Reads only the chunk headers (``fmt `` for the bytes per frame, ``ds64``
    for RF64 sizes, ``data`` for the size). Never raises on a damaged file.
    """
    try:
        with open(path, "rb") as fh:
            head = fh.read(12)
            if len(head) < 12 or head[8:12] not in (b"WAVE",):
                return None
            kind = head[:4]
            if kind not in (b"RIFF", b"RIFX", b"RF64", b"BW64"):
                return None
            end = "<" if kind != b"RIFX" else ">"
            block_align = None
            ds64_data = None
            for _ in range(_MOST_CHUNKS):
                ch = fh.read(8)
                if len(ch) < 8:
                    return None
                cid = ch[:4]
                (size,) = struct.unpack(end + "I", ch[4:])
                if cid == b"fmt ":
                    body = fh.read(min(size, 64))
                    if len(body) < 16:
                        return None
                    tag, channels = struct.unpack(end + "HH", body[:4])
                    bits = struct.unpack(end + "H", body[14:16])[0]
                    if tag not in _PLAIN_TAGS:
                        return None  # compressed: frames do not follow from bytes
                    # from channels and sample width: some writers get block_align wrong
                    block_align = channels * ((bits + 7) // 8)
                    fh.seek(size - len(body) + (size & 1), 1)
                elif cid == b"ds64":
                    body = fh.read(min(size, 28))
                    if len(body) >= 16:
                        ds64_data = struct.unpack("<Q", body[8:16])[0]
                    fh.seek(size - len(body) + (size & 1), 1)
                elif cid == b"data":
                    if size == 0xFFFFFFFF and ds64_data is not None:
                        size = ds64_data
                    if not block_align:
                        return None
                    return int(size // block_align)
                else:
                    fh.seek(size + (size & 1), 1)
    except (OSError, struct.error, ValueError):
        return None
    return None


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

    try:
        size = os.path.getsize(path)
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
                    if tag == 0xFFFE and len(body) >= 26:
                        tag = struct.unpack(end + "H", body[24:26])[0]   # the sub-format GUID
                    fmt = (tag, channels, bits)
                    fh.seek(chunk - len(body) + (chunk & 1), 1)
                elif cid == b"ds64":
                    body = fh.read(min(chunk, 28))
                    if len(body) >= 16:
                        ds64_data = struct.unpack("<Q", body[8:16])[0]
                    fh.seek(chunk - len(body) + (chunk & 1), 1)
                elif cid == b"data":
                    if chunk == 0xFFFFFFFF and ds64_data is not None:
                        chunk = ds64_data
                    if fmt is None or (fmt[0], fmt[2]) not in _MAPPED or fmt[1] < 1:
                        return None
                    tag, channels, bits = fmt
                    kind, scale = _MAPPED[(tag, bits)]
                    offset = fh.tell()
                    frame = channels * (bits // 8)
                    frames = min(chunk, max(0, size - offset)) // frame
                    return {"offset": offset, "frames": int(frames), "channels": int(channels),
                            "kind": kind, "scale": scale,
                            "byteorder": "big" if end == ">" else "little"}
                else:
                    fh.seek(chunk + (chunk & 1), 1)
    except (OSError, struct.error, ValueError):
        return None
    return None
