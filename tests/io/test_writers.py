"""Outputs read back by independent readers (Python's wave, csv and json modules,
numpy.load), clipping counts, and atomic replacement that never loses a file.
"""

from __future__ import annotations

import csv
import json
import os
import wave

import numpy as np
import pytest
import soundfile as sf

from scalesieve.core.recording import Recording
from scalesieve.errors import ScalesieveError
from scalesieve.io.atomic import atomic_write
from scalesieve.io.readers import read_recording
from scalesieve.io.writers import (write_audio, write_csv, write_json, write_npz,
                                   write_recording, write_signal, write_table_csv)


def wave_frames(path) -> tuple[tuple[int, int, int, int], bytes]:
    """(channels, sample width, rate, frames) and the raw frames, by the wave module."""
    with wave.open(str(path), "rb") as w:
        return (w.getnchannels(), w.getsampwidth(), w.getframerate(), w.getnframes()), \
            w.readframes(w.getnframes())


def leftovers(folder) -> list[str]:
    return sorted(n for n in os.listdir(folder) if ".tmp-" in n)


# ------------------------------------------------------------------------- audio

def test_pcm16_export_read_by_wave_module(tmp_path):
    x = np.array([[0.0, 0.5], [0.25, -0.25], [-1.0, 0.999], [1e-5, -0.75]])
    out = write_audio(tmp_path / "o.wav", x, 16000, subtype="PCM_16")
    (ch, width, rate, n), raw = wave_frames(tmp_path / "o.wav")
    assert (ch, width, rate, n) == (2, 2, 16000, 4)
    got = np.frombuffer(raw, "<i2").reshape(-1, 2)
    # Float to PCM: round(x * 32768), the inverse of the v / 32768 read scaling.
    np.testing.assert_array_equal(got, np.round(x * 32768).astype(int))
    assert out["clipped"] == 0 and out["subtype"] == "PCM_16"


def test_pcm24_and_u8_exports_read_by_wave_module(tmp_path):
    x = np.array([0.0, 0.5, -0.5, 0.123456, -1.0])
    write_audio(tmp_path / "o24.wav", x, 8000, subtype="PCM_24")
    (_, width, _, _), raw = wave_frames(tmp_path / "o24.wav")
    assert width == 3
    got = [int.from_bytes(raw[i:i + 3], "little", signed=True) for i in range(0, len(raw), 3)]
    # v = x * 2**23 within one step: libsndfile reaches 24 bits through a 32-bit
    # integer and drops the low byte, so it may truncate rather than round.
    assert np.all(np.abs(np.array(got) - x * 2**23) <= 1)
    assert got[:3] == [0, 4194304, -4194304] and got[4] == -8388608  # exact in 24 bits

    write_audio(tmp_path / "o8.wav", x, 8000, subtype="PCM_U8")
    (_, width, _, _), raw = wave_frames(tmp_path / "o8.wav")
    assert width == 1
    # 8-bit WAV is unsigned, centred on 128 (WAV format convention).
    u = np.frombuffer(raw, np.uint8).astype(int)
    assert np.all(np.abs(u - (x * 128 + 128)) <= 1)  # within one step, as above
    assert u[[0, 1, 2, 4]].tolist() == [128, 192, 64, 0]


def test_clipping_is_counted_and_clipped_to_full_scale(tmp_path):
    x = np.array([0.2, 1.0, 1.7, -1.0, -1.0001, -3.0, 0.9999])
    out = write_audio(tmp_path / "c.wav", x, 8000, subtype="PCM_16")
    # Outside [-1, 1): 1.0, 1.7, -1.0001, -3.0 (-1.0 itself is representable).
    assert out["clipped"] == int(np.count_nonzero((x < -1) | (x >= 1))) == 4
    _, raw = wave_frames(tmp_path / "c.wav")
    got = np.frombuffer(raw, "<i2")
    assert got[1] == got[2] == 32767 and got[4] == got[5] == -32768


def test_clipping_in_a_few_blocks_of_a_long_signal_is_counted_and_clipped(tmp_path):
    # Blocks of the writer are 65536 frames; loud samples at and around their edges,
    # in one channel of two. Reference: Python's wave module reading the frames, and
    # 16-bit full scale (-32768 .. 32767, the WAV format's signed PCM).
    x = np.random.default_rng(3).uniform(-0.5, 0.5, (200_000, 2))
    loud = [(65535, 1, 1.5), (65536, 1, -2.0), (131071, 0, 1.0), (199_999, 0, -1.25)]
    for r, c, v in loud:
        x[r, c] = v
    out = write_audio(tmp_path / "long.wav", x, 8000, subtype="PCM_16")
    assert out["clipped"] == int(np.count_nonzero((x < -1) | (x >= 1))) == 4
    _, raw = wave_frames(tmp_path / "long.wav")
    got = np.frombuffer(raw, "<i2").reshape(-1, 2)
    assert [int(got[r, c]) for r, c, _ in loud] == [32767, -32768, 32767, -32768]
    quiet = np.ones(x.shape, bool)
    for r, c, _ in loud:
        quiet[r, c] = False
    assert np.all(np.abs(got[quiet] / 32768.0 - x[quiet]) <= 1 / 32768)


def test_float_keeps_values_beyond_full_scale(tmp_path):
    x = np.array([[0.5, 2.5], [-4.0, 0.1]])
    out = write_audio(tmp_path / "f.wav", x, 48000)  # default FLOAT
    assert out["subtype"] == "FLOAT" and out["clipped"] == 0
    back, rate = sf.read(tmp_path / "f.wav", always_2d=True)
    assert rate == 48000
    np.testing.assert_array_equal(back, x.astype(np.float32))


def test_flac_round_trip_is_lossless(tmp_path):
    rng = np.random.default_rng(5)
    ints = rng.integers(-32768, 32768, size=(500, 3))
    x = ints / 32768.0
    out = write_audio(tmp_path / "r.flac", x, 44100, subtype="PCM_16")
    assert out["format"] == "FLAC"
    rec = read_recording(tmp_path / "r.flac")
    # FLAC is lossless (FLAC format specification): the same integers come back.
    np.testing.assert_array_equal(rec.samples, x)
    assert rec.subtype == "PCM_16" and rec.rate == 44100.0 and rec.channels == 3


def test_nan_samples_write_nothing(tmp_path):
    with pytest.raises(ScalesieveError) as info:
        write_audio(tmp_path / "n.wav", np.array([0.0, np.nan]), 8000)
    assert "finite" in info.value.message
    assert not (tmp_path / "n.wav").exists() and leftovers(tmp_path) == []


def test_rates_and_subtypes_checked(tmp_path):
    x = np.zeros(10)
    with pytest.raises(ScalesieveError, match="whole-number"):
        write_audio(tmp_path / "a.wav", x, 3333.3333)
    with pytest.raises(ScalesieveError, match="PCM_99"):
        write_audio(tmp_path / "a.wav", x, 8000, subtype="PCM_99")
    with pytest.raises(ScalesieveError, match="cannot be written as FLAC"):
        write_audio(tmp_path / "a.flac", x, 8000, subtype="FLOAT")
    # Float noise in a rate found from a time column is rounded away.
    assert write_audio(tmp_path / "b.wav", x, 48000.0000001)["rate"] == 48000.0
    assert leftovers(tmp_path) == []


# --------------------------------------------------------------------------- csv

def test_csv_export_read_by_csv_module(tmp_path):
    rng = np.random.default_rng(11)
    x = rng.standard_normal((40, 2))
    write_csv(tmp_path / "o.csv", x, 250.0, ["strain_1", "strain, 2"])
    with open(tmp_path / "o.csv", newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    assert rows[0] == ["time_s", "strain_1", "strain, 2"]
    body = np.array([[float(c) for c in r] for r in rows[1:]])
    np.testing.assert_array_equal(body[:, 0], np.arange(40) / 250.0)
    np.testing.assert_array_equal(body[:, 1:], x)  # %.17g reads back exactly
    assert (tmp_path / "o.csv").read_bytes().count(b"\r") == 0


def test_csv_export_reads_back_as_a_recording(tmp_path):
    x = np.linspace(-1, 1, 30).reshape(15, 2)
    write_csv(tmp_path / "o.csv", x, 1000.0, ["a", "b"])
    rec = read_recording(tmp_path / "o.csv")
    assert rec.rate == 1000.0 and rec.channel_names == ["a", "b"]
    np.testing.assert_array_equal(rec.samples, x)


# ------------------------------------------------------------------ write_signal

def test_write_signal_chooses_by_extension(tmp_path):
    x = np.zeros((8, 1))
    assert write_signal(tmp_path / "a.wav", x, 8000, ["ch0"])["subtype"] == "FLOAT"
    assert write_signal(tmp_path / "a.flac", x, 8000, ["ch0"])["subtype"] == "PCM_24"
    assert write_signal(tmp_path / "a.aif", x, 8000, ["ch0"])["format"] == "AIFF"
    assert write_signal(tmp_path / "a.csv", x, 8000, ["ch0"])["kind"] == "csv"
    assert write_signal(tmp_path / "a.txt", x, 8000, ["ch0"])["kind"] == "csv"
    with pytest.raises(ScalesieveError, match="extension"):
        write_signal(tmp_path / "a.xlsx", x, 8000, ["ch0"])


def test_write_signal_keeps_input_subtype(tmp_path):
    src = tmp_path / "in.wav"
    sf.write(src, np.linspace(-0.5, 0.5, 32), 22050, subtype="PCM_16")
    rec = read_recording(src)
    out = write_signal(tmp_path / "out.wav", rec.samples, rec.rate, rec.channel_names, like=rec)
    assert out["subtype"] == "PCM_16" and sf.info(tmp_path / "out.wav").samplerate == 22050
    out = write_signal(tmp_path / "out.flac", rec.samples, rec.rate, rec.channel_names, like=rec)
    assert out["subtype"] == "PCM_16"
    # --subtype wins over the input's.
    out = write_recording(tmp_path / "out24.wav", rec, subtype="PCM_24")
    assert sf.info(tmp_path / "out24.wav").subtype == "PCM_24"


def test_float_input_into_flac_becomes_24_bit(tmp_path):
    src = tmp_path / "in.wav"
    sf.write(src, np.array([0.1, 0.2]), 8000, subtype="FLOAT")
    rec = read_recording(src)
    assert write_recording(tmp_path / "o.flac", rec)["subtype"] == "PCM_24"


def test_write_signal_never_overwrites_its_input(tmp_path):
    src = tmp_path / "in.wav"
    sf.write(src, np.array([0.1, 0.2]), 8000, subtype="PCM_16")
    before = src.read_bytes()
    rec = read_recording(src)
    with pytest.raises(ScalesieveError, match="input"):
        write_recording(src, rec, force=True)
    assert src.read_bytes() == before


# --------------------------------------------------------------- results files

def test_json_npz_and_table(tmp_path):
    write_json(tmp_path / "r.json", {"rate": np.float64(48000.0), "n": np.int64(3),
                                     "sigma": float("nan"), "levels": np.array([1, 2])})
    assert json.loads((tmp_path / "r.json").read_text()) == {
        "rate": 48000.0, "n": 3, "sigma": None, "levels": [1, 2]}

    arrays = {"d1": np.arange(5.0), "a3": np.ones((2, 2))}
    write_npz(tmp_path / "c.npz", arrays)
    with np.load(tmp_path / "c.npz") as z:
        assert sorted(z.files) == ["a3", "d1"]
        np.testing.assert_array_equal(z["d1"], arrays["d1"])

    rows = [{"start_s": 0.5995, "stop_s": 0.6031, "level": 2},
            {"start_s": 1.25, "stop_s": 1.5, "level": 1, "channel": 0}]
    write_table_csv(tmp_path / "e.csv", rows)
    with open(tmp_path / "e.csv", newline="") as fh:
        back = list(csv.DictReader(fh))
    assert list(back[0]) == ["start_s", "stop_s", "level", "channel"]
    assert float(back[0]["start_s"]) == 0.5995 and back[0]["channel"] == ""
    assert back[1]["channel"] == "0"


def test_empty_table_still_has_its_header(tmp_path):
    write_table_csv(tmp_path / "none.csv", [], fieldnames=["start_s", "stop_s"])
    assert (tmp_path / "none.csv").read_text() == "start_s,stop_s\n"


# ---------------------------------------------------------------------- atomic

def test_existing_target_needs_force(tmp_path):
    p = tmp_path / "r.json"
    p.write_text("old")
    with pytest.raises(ScalesieveError) as info:
        write_json(p, {"a": 1})
    assert "exists; use --force to replace it" in info.value.message
    assert p.read_text() == "old"
    write_json(p, {"a": 1}, force=True)
    assert json.loads(p.read_text()) == {"a": 1}
    assert leftovers(tmp_path) == []


def test_failed_write_keeps_old_file_and_removes_temporary(tmp_path):
    p = tmp_path / "keep.wav"
    p.write_bytes(b"precious")
    seen = []

    def half_written(tmp):
        seen.append(tmp)
        with open(tmp, "wb") as fh:
            fh.write(b"partial")
        raise RuntimeError("disk went away")

    with pytest.raises(RuntimeError):
        atomic_write(p, half_written, force=True)
    assert p.read_bytes() == b"precious"
    assert leftovers(tmp_path) == [] and not os.path.exists(seen[0])
    # The temporary file sat beside the target and kept its suffix.
    assert os.path.dirname(seen[0]) == str(tmp_path) and seen[0].endswith(".wav")
    assert os.path.basename(seen[0]).startswith(".keep.tmp-")


def test_protect_refuses_even_with_force_and_through_links(tmp_path):
    src = tmp_path / "input.csv"
    src.write_text("t,a\n0,1\n")
    link = tmp_path / "alias.csv"
    link.symlink_to(src)
    hard = tmp_path / "hard.csv"
    os.link(src, hard)
    for target in (src, link, hard):
        with pytest.raises(ScalesieveError, match="input"):
            write_json(target, {}, force=True, protect=[src])
    with pytest.raises(ScalesieveError, match="input"):
        write_json(src, {}, force=True, protect=str(src))  # a lone path, not a list
    assert src.read_text() == "t,a\n0,1\n"
    assert leftovers(tmp_path) == []


def test_context_manager_form(tmp_path):
    p = tmp_path / "ctx.txt"
    with atomic_write(p) as tmp:
        assert not p.exists()
        with open(tmp, "w") as fh:
            fh.write("done")
    assert p.read_text() == "done"


def test_missing_folder_and_folder_target(tmp_path):
    with pytest.raises(ScalesieveError, match="does not exist"):
        write_json(tmp_path / "no" / "r.json", {})
    (tmp_path / "d.json").mkdir()
    with pytest.raises(ScalesieveError, match="folder"):
        write_json(tmp_path / "d.json", {}, force=True)


def test_recording_dataclass_round_trip_through_csv(tmp_path):
    rec = Recording(np.array([[0.1, 0.2], [0.3, 0.4]]), 10.0, ["x", "y"])
    write_recording(tmp_path / "r.csv", rec)
    back = read_recording(tmp_path / "r.csv")
    np.testing.assert_array_equal(back.samples, rec.samples)
    assert back.channel_names == ["x", "y"] and back.rate == 10.0
