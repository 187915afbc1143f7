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
