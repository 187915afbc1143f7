"""What an audio file's header says (rate, channels, frames, format), read through soundfile.

The one place the readers in blocks (``stream.sources``) and the long window's sample
reader (``longview.samples``) open a file for its facts, with one message when it cannot.
"""

from __future__ import annotations

from typing import NamedTuple

import soundfile as sf

from scalesieve.errors import ScalesieveError


class AudioFacts(NamedTuple):
    rate: float
    channels: int
    frames: int
    format: str
    subtype: str


def audio_facts(path: str) -> AudioFacts:
    """The header's facts of the audio file ``path``.

    Raises
    ------
    ScalesieveError
        ``could not read the audio samples (...)``, with soundfile's reason.
    """
    from scalesieve.io.quiet_native import quiet_native_stderr

    try:
        with quiet_native_stderr(), sf.SoundFile(path) as f:
            return AudioFacts(float(f.samplerate), int(f.channels), int(f.frames),
                              f.format, f.subtype)
    except Exception as exc:  # noqa: BLE001 - soundfile's own errors vary by version
        raise ScalesieveError(f"could not read the audio samples ({exc})", path) from None
