"""Audio input: files written by Python's ``wave`` module, read by read_recording.

Expected values use the usual PCM to float scaling that soundfile documents
for its float output (common practice): a signed b-bit integer v becomes
v / 2**(b-1) (int16: v / 32768), 8-bit WAV is unsigned and centred on 128,
so u becomes (u - 128) / 128.
"""

from __future__ import annotations

import os
import struct
import wave

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
import soundfile as sf

from scalesieve.errors import ScalesieveError
from scalesieve.io.readers import probe, read_recording


def wave_file(path, frames: bytes, *, width: int, channels: int = 1, rate: int = 8000):
    """A reference WAV written by the standard library's wave module."""
    with wave.open(str(path), "wb") as w:
        w.setnchannels(channels)
        w.setsampwidth(width)
        w.setframerate(rate)
        w.writeframes(frames)
    return path


def error_of(path, **kw) -> ScalesieveError:
    with pytest.raises(ScalesieveError) as info:
        read_recording(path, **kw)
    assert info.value.source == str(path)
    return info.value


INT16 = np.array([0, 1, -1, 12345, -23456, 32767, -32768], dtype="<i2")


def test_pcm16_mono(tmp_path):
    p = wave_file(tmp_path / "m16.wav", INT16.tobytes(), width=2, rate=44100)
    rec = read_recording(p)
    assert rec.rate == 44100.0
    assert rec.format == "WAV" and rec.subtype == "PCM_16"
    assert rec.channel_names == ["ch0"]
    np.testing.assert_array_equal(rec.samples[:, 0], INT16 / 32768.0)


def test_pcm16_stereo_interleaved(tmp_path):
    left = INT16
    right = (-INT16.astype(np.int32)).clip(-32768, 32767).astype("<i2")
    frames = np.column_stack([left, right]).astype("<i2").tobytes()  # L R L R ...
    p = wave_file(tmp_path / "s16.wav", frames, width=2, channels=2)
    rec = read_recording(p)
    assert rec.channels == 2 and rec.channel_names == ["ch0", "ch1"]
    np.testing.assert_array_equal(rec.samples[:, 0], left / 32768.0)
    np.testing.assert_array_equal(rec.samples[:, 1], right / 32768.0)


def test_pcm8_unsigned(tmp_path):
    u = np.array([0, 64, 128, 192, 255], dtype=np.uint8)
    p = wave_file(tmp_path / "u8.wav", u.tobytes(), width=1)
    rec = read_recording(p)
    assert rec.subtype == "PCM_U8"
    np.testing.assert_array_equal(rec.samples[:, 0], (u.astype(float) - 128) / 128)


def test_pcm24_stereo(tmp_path):
    values = np.array([[0, -8388608], [8388607, 1], [-1, 4194304], [123456, -7654321]])
    raw = b"".join(int(v).to_bytes(3, "little", signed=True) for v in values.ravel())
    p = wave_file(tmp_path / "s24.wav", raw, width=3, channels=2, rate=96000)
    rec = read_recording(p)
    assert rec.subtype == "PCM_24" and rec.rate == 96000.0
    np.testing.assert_array_equal(rec.samples, values / 2.0**23)


def test_pcm32(tmp_path):
    v = np.array([0, 2**31 - 1, -2**31, 1 << 20], dtype="<i4")
    p = wave_file(tmp_path / "p32.wav", v.tobytes(), width=4)
    rec = read_recording(p)
    assert rec.subtype == "PCM_32"
    np.testing.assert_array_equal(rec.samples[:, 0], v / 2.0**31)


def test_float32_mode_and_channel_pick(tmp_path):
    frames = np.column_stack([INT16, INT16[::-1]]).astype("<i2").tobytes()
    p = wave_file(tmp_path / "s.wav", frames, width=2, channels=2)
    rec = read_recording(p, channel=1, dtype=np.float32)
    assert rec.samples.dtype == np.float32
    assert rec.channel_names == ["ch1"]
    np.testing.assert_array_equal(rec.samples[:, 0], (INT16[::-1] / 32768.0).astype(np.float32))


def test_channel_out_of_range_names_count(tmp_path):
    p = wave_file(tmp_path / "s.wav", np.zeros(8, "<i2").tobytes(), width=2, channels=2)
    err = error_of(p, channel=2)
    assert "channel 2" in err.message and "2 channels" in err.message
    assert "channel -1" in error_of(p, channel=-1).message


def test_rate_must_match_audio_header(tmp_path):
    p = wave_file(tmp_path / "r.wav", INT16.tobytes(), width=2, rate=8000)
    assert read_recording(p, rate=8000).rate == 8000.0
    err = error_of(p, rate=48000)
    assert "8000" in err.message and "48000" in err.message


def test_other_formats_through_soundfile(tmp_path):
    x = np.linspace(-0.5, 0.5, 64)[:, None] * [1.0, -1.0]
    for name, subtype in [("a.flac", "PCM_16"), ("a.aiff", "PCM_24"), ("a.wav", "ULAW"),
                          ("b.wav", "DOUBLE"), ("a.ogg", "VORBIS")]:
        sf.write(tmp_path / name, x, 16000, subtype=subtype)
        rec = read_recording(tmp_path / name)
        assert rec.subtype == subtype and rec.channels == 2 and rec.n == 64
        ref, _ = sf.read(tmp_path / name, always_2d=True)  # soundfile itself as reference
        np.testing.assert_array_equal(rec.samples, ref)


def test_content_beats_extension(tmp_path):
    p = wave_file(tmp_path / "really_audio.txt", INT16.tobytes(), width=2)
    assert read_recording(p).subtype == "PCM_16"
    q = tmp_path / "table.data"
    q.write_text("t,a\n0,1\n1,2\n")
    assert read_recording(q).channel_names == ["a"]


def test_nan_in_float_wav(tmp_path):
    x = np.array([0.0, 0.5, np.nan, 0.25, 0.0])
    p = tmp_path / "nan.wav"
    sf.write(p, x, 1000, subtype="FLOAT")
    err = error_of(p)
    assert "sample 2" in err.message and "--fill-gaps" in err.message
    rec = read_recording(p, fill_gaps="linear")
    np.testing.assert_array_equal(rec.samples[:, 0], [0.0, 0.5, 0.375, 0.25, 0.0])


# ------------------------------------------------------------------------ errors

def test_missing_file(tmp_path):
    assert "not found" in error_of(tmp_path / "nope.wav").message


def test_folder(tmp_path):
    d = tmp_path / "dir.wav"
    d.mkdir()
    assert "folder" in error_of(d).message


def test_empty_audio_file(tmp_path):
    p = tmp_path / "e.wav"
    p.write_bytes(b"")
    assert "empty" in error_of(p).message


def test_truncated_header(tmp_path):
    p = wave_file(tmp_path / "full.wav", INT16.tobytes(), width=2)
    cut = tmp_path / "cut.wav"
    cut.write_bytes(p.read_bytes()[:30])
    assert "not a readable audio file" in error_of(cut).message


def test_zero_frames(tmp_path):
    p = wave_file(tmp_path / "zero.wav", b"", width=2)
    assert "no audio samples" in error_of(p).message


def test_junk_with_audio_extension(tmp_path):
    p = tmp_path / "junk.flac"
    p.write_bytes(bytes(range(7, 250)) * 10)
    assert "not a readable audio file" in error_of(p).message


def test_unknown_binary(tmp_path):
    p = tmp_path / "blob.xyz"
    p.write_bytes(b"\x00\x01\x02\x03" * 100)
    assert "neither a text table nor an audio format" in error_of(p).message


def test_permission_denied(tmp_path):
    p = wave_file(tmp_path / "locked.wav", INT16.tobytes(), width=2)
    p.chmod(0)
    try:
        if os.access(p, os.R_OK):
            pytest.skip("running with rights that ignore file permissions")
        assert "permission" in error_of(p).message
    finally:
        p.chmod(0o644)


def test_header_claiming_huge_data_is_not_trusted(tmp_path):
    p = wave_file(tmp_path / "h.wav", INT16.tobytes(), width=2)
    raw = bytearray(p.read_bytes())
    at = raw.find(b"data")
    raw[at + 4:at + 8] = struct.pack("<I", 0xFFFFFFF0)  # ~4 GiB claimed (WAV spec field)
    raw[4:8] = struct.pack("<I", 0xFFFFFFF8)
    bad = tmp_path / "huge.wav"
    bad.write_bytes(bytes(raw))
    facts = probe(bad)
    # A 58-byte file cannot hold more than (58 bytes / 2 bytes per sample) frames.
    assert facts["frames"] <= len(raw) // 2
    rec = read_recording(bad)
    np.testing.assert_array_equal(rec.samples[:, 0], INT16 / 32768.0)


def test_flac_claiming_huge_frame_count_is_a_clear_error(tmp_path):
    p = tmp_path / "a.flac"
    sf.write(p, np.zeros(100), 8000, subtype="PCM_16")
    raw = bytearray(p.read_bytes())
    # STREAMINFO starts at byte 8; its total-samples field is the low 36 bits of
    # bytes 18..25 (FLAC format specification, METADATA_BLOCK_STREAMINFO).
    v = int.from_bytes(raw[18:26], "big") | ((1 << 36) - 1)
    raw[18:26] = v.to_bytes(8, "big")
    p.write_bytes(bytes(raw))
    assert probe(p)["frames"] == (1 << 36) - 1  # what the header says ...
    err = error_of(p)                           # ... is not allocated
    assert "damaged" in err.message


def test_truncated_data_loads_what_is_there(tmp_path):
    p = wave_file(tmp_path / "t.wav", np.arange(1000, dtype="<i2").tobytes(), width=2)
    raw = p.read_bytes()
    cut = tmp_path / "cut.wav"
    cut.write_bytes(raw[:44 + 2 * 600])  # 44-byte canonical header + 600 samples
    rec = read_recording(cut)
    np.testing.assert_array_equal(rec.samples[:, 0], np.arange(600) / 32768.0)


def test_probe_audio(tmp_path):
    p = wave_file(tmp_path / "p.wav", np.zeros(300, "<i2").tobytes(), width=2, channels=3,
                  rate=22050)
    facts = probe(p)
    assert facts == {**facts, "kind": "audio", "frames": 100, "rate": 22050.0, "channels": 3,
                     "format": "WAV", "subtype": "PCM_16", "estimated_bytes": 100 * 3 * 8}
    assert facts["duration_s"] == pytest.approx(100 / 22050)


def test_probe_errors_are_plain(tmp_path):
    with pytest.raises(ScalesieveError):
        probe(tmp_path / "nothing.wav")


# ------------------------------------------------------------------ any damage


@settings(max_examples=60, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(cut=st.integers(0, 120),
       flips=st.lists(st.tuples(st.integers(0, 80), st.integers(0, 255)), max_size=6))
def test_damaged_wav_loads_or_gives_one_plain_error(tmp_path, cut, flips):
    good = wave_file(tmp_path / "good.wav", np.arange(-20, 20, dtype="<i2").tobytes(), width=2,
                     channels=2)
    raw = bytearray(good.read_bytes())
    for at, value in flips:
        raw[at] = value
    p = tmp_path / "damaged.wav"
    p.write_bytes(bytes(raw[:len(raw) - cut]))
    try:
        rec = read_recording(p)
    except ScalesieveError as err:
        assert err.source == str(p) and err.message
    else:
        assert rec.n > 0 and np.isfinite(rec.samples).all()
