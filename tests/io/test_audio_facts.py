"""An audio file's header facts, read in one place for the readers in blocks and the window.

Expected values come from Python's own wave module (rate, channels, frames of a 16-bit PCM
WAV it writes) and from soundfile's ``info`` (format and subtype names).
"""

from __future__ import annotations

import wave

import numpy as np
import pytest
import soundfile as sf

from scalesieve.errors import ScalesieveError
from scalesieve.io.audio_facts import audio_facts
from scalesieve.longview.samples import SampleReader
from scalesieve.stream.sources import _Source


@pytest.fixture
def pcm(tmp_path):
    path = tmp_path / "fan.wav"
    with wave.open(str(path), "wb") as w:
        w.setnchannels(3)
        w.setsampwidth(2)
        w.setframerate(11025)
        w.writeframes(np.arange(3 * 777, dtype="<i2").tobytes())
    return path


def test_the_facts_are_the_headers(pcm):
    with wave.open(str(pcm), "rb") as w:
        expected = (float(w.getframerate()), w.getnchannels(), w.getnframes())
    info = sf.info(str(pcm))
    assert audio_facts(str(pcm)) == (*expected, info.format, info.subtype)


def test_both_readers_take_them_from_there(pcm):
    facts = audio_facts(str(pcm))
    src = _Source(str(pcm), None)
    assert (src.rate, src.file_channels, src.frames, src.format, src.subtype) == facts
    view = SampleReader(str(pcm), channel=1)
    assert (view.rate, view.file_channels, view.frames) == facts[:3]
    assert view.channels == 1


def test_an_unreadable_file_is_one_message_for_both(tmp_path):
    bad = tmp_path / "torn.wav"
    bad.write_bytes(b"RIFF\x00\x00\x00\x00WAVEjunk")
    messages = []
    for open_it in (audio_facts, lambda p: _Source(p, None), SampleReader):
        with pytest.raises(ScalesieveError) as err:
            open_it(str(bad))
        messages.append(err.value.one_line())
    assert len(set(messages)) == 1
    assert messages[0].startswith(f"{bad}: could not read the audio samples (")
