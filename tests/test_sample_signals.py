"""The demo recordings regenerate exactly and hold what their README states.

Formats are checked with readers outside the project (Python's ``wave`` and
``csv`` modules, soundfile); contents with plain FFTs and SciPy's Hilbert
transform, against the numbers written in sample_signals/README.md.
"""

from __future__ import annotations

import csv
import importlib.util
import subprocess
import sys
import wave
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

SAMPLES = Path(__file__).resolve().parents[1] / "sample_signals"
SCRIPT = SAMPLES / "make_samples.py"
FILES = ["pump_bearing.wav", "pump_bearing.events.csv", "fan_bearing.wav", "rig_strain_logger.csv",
         "field_mic_clicks.flac", "field_mic_clicks.events.csv", "lab_trace_baseline.csv",
         "cooling_loop_logger.csv"]


def _load_script():
    spec = importlib.util.spec_from_file_location("make_samples", SCRIPT)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def _mad_sigma(x: np.ndarray) -> float:
    # Donoho & Johnstone 1994, Biometrika 81:425: sigma = median|x| / 0.6745.
    return float(np.median(np.abs(x)) / 0.6745)


def _band(x: np.ndarray, rate: float, lo: float, hi: float) -> np.ndarray:
    f = np.fft.rfftfreq(x.shape[0], 1.0 / rate)
    spec = np.fft.rfft(x)
    spec[(f < lo) | (f > hi)] = 0.0
    return np.fft.irfft(spec, x.shape[0])


def _peak_hz(x: np.ndarray, rate: float, lo: float, hi: float) -> float:
    f = np.fft.rfftfreq(x.shape[0], 1.0 / rate)
    mag = np.abs(np.fft.rfft(x))
    sel = (f >= lo) & (f <= hi)
    return float(f[sel][np.argmax(mag[sel])])


def _text_rows(path: Path, delimiter: str) -> tuple[list[str], list[list[str]]]:
    with open(path, newline="", encoding="ascii") as fh:
        lines = fh.read().splitlines()
    comments = [ln for ln in lines if ln.startswith("#")]
    rows = list(csv.reader([ln for ln in lines if not ln.startswith("#")], delimiter=delimiter))
    return comments, rows


def _numbers(rows: list[list[str]], decimal_comma: bool = False) -> np.ndarray:
    def num(cell: str) -> float:
        return float(cell.replace(",", ".") if decimal_comma else cell)
    return np.array([[num(c) for c in r] for r in rows])


# ---------------------------------------------------------------- regeneration

@pytest.fixture(scope="module")
def regenerated(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("regen")
    # The documented command line, run as a user would.
    proc = subprocess.run([sys.executable, str(SCRIPT), str(out)],
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    return out


@pytest.mark.parametrize("name", FILES)
def test_regenerated_file_matches_committed(regenerated, name):
    new, old = regenerated / name, SAMPLES / name
    assert old.exists(), f"{name} is not committed"
    if new.read_bytes() == old.read_bytes():
        return
    # Bytes may differ on another platform (FLAC encoder version string,
    # last-bit libm differences flipping one rounding); then data must agree.
    if name.endswith((".wav", ".flac")):
        a, ra = sf.read(str(new), dtype="int16")
        b, rb = sf.read(str(old), dtype="int16")
        assert ra == rb and a.shape == b.shape
        diff = np.abs(a.astype(int) - b.astype(int))
        assert diff.max() <= 1
        assert np.mean(diff == 0) >= 0.999
    else:
        delim = ";" if name == "rig_strain_logger.csv" else ","
        ca, ra_ = _text_rows(new, delim)
        cb, rb_ = _text_rows(old, delim)
        assert ca == cb and ra_[0] == rb_[0] and len(ra_) == len(rb_)
        for x, y in zip(ra_[1:], rb_[1:]):
            for u, v in zip(x, y):
                if u != v:  # one unit in the last printed digit at most
                    step = 10.0 ** -len(v.replace(",", ".").split(".")[-1])
                    assert abs(float(u.replace(",", ".")) - float(v.replace(",", "."))) <= step * 1.01


def test_script_is_deterministic_and_keeps_other_files(tmp_path, capsys):
    mod = _load_script()
    assert mod.main([str(tmp_path)]) == 0
    first = {n: (tmp_path / n).read_bytes() for n in FILES}
    assert mod.main([str(tmp_path)]) == 0
    assert {n: (tmp_path / n).read_bytes() for n in FILES} == first
    assert "unchanged" in capsys.readouterr().out

    # A different file of the same name is the user's: kept without --force.
    mine = tmp_path / "lab_trace_baseline.csv"
    mine.write_text("my own data\n")
    assert mod.main([str(tmp_path)]) == 1
    assert mine.read_text() == "my own data\n"
    assert "--force" in capsys.readouterr().err
    assert mod.main([str(tmp_path), "--force"]) == 0
    assert mine.read_bytes() == first["lab_trace_baseline.csv"]


def test_sizes_stay_small():
    sizes = {n: (SAMPLES / n).stat().st_size for n in FILES}
    assert max(sizes.values()) < 3_000_000
    assert sum(sizes.values()) < 8_000_000


# ---------------------------------------------------------------- pump_bearing

BPFO_HZ = 87.3
SHAFT_HZ = 24.75
KNOCK_S = 2.618


@pytest.fixture(scope="module")
def pump():
    x, rate = sf.read(str(SAMPLES / "pump_bearing.wav"))
    with open(SAMPLES / "pump_bearing.events.csv", newline="") as fh:
        events = list(csv.DictReader(fh))
    return x, rate, events


def test_pump_format_with_python_wave_module():
    path = SAMPLES / "pump_bearing.wav"
    with wave.open(str(path), "rb") as w:
        assert (w.getframerate(), w.getnchannels(), w.getsampwidth(), w.getnframes()) == \
            (25600, 1, 2, 102400)
        raw = np.frombuffer(w.readframes(w.getnframes()), dtype="<i2")
    via_soundfile, _ = sf.read(str(path), dtype="int16")
    assert np.array_equal(raw, via_soundfile)
    # No clipping: peak well inside full scale (README: peak below 0.6).
    assert np.abs(raw.astype(int)).max() < 0.6 * 32768


def test_pump_tones(pump):
    x, rate, _ = pump
    # 4.000 s gives 0.25 Hz FFT bins; every stated tone sits on a bin.
    assert _peak_hz(x, rate, 10, 40) == SHAFT_HZ
    assert _peak_hz(x, rate, 150, 200) == 7 * SHAFT_HZ          # blade pass, 7 vanes
    f = np.fft.rfftfreq(x.shape[0], 1.0 / rate)
    amp = 2.0 * np.abs(np.fft.rfft(x)) / x.shape[0]
    at = {hz: amp[np.argmin(np.abs(f - hz))] for hz in (24.75, 49.5, 50.0, 100.0, 173.25)}
    # Amplitudes as stated in the README (shaft 0.12, 2x 0.04, mains 0.03/0.008,
    # blade pass 0.05); noise adds well under 0.002 per bin here.
    for hz, want in {24.75: 0.12, 49.5: 0.04, 50.0: 0.03, 100.0: 0.008, 173.25: 0.05}.items():
        assert abs(at[hz] - want) < 0.003, (hz, at[hz])


def test_pump_envelope_spectrum_shows_bpfo(pump):
    from scipy.signal import hilbert  # reference implementation of the analytic signal
    x, rate, _ = pump
    # Envelope analysis of the resonance band: common practice for bearing
    # defects (Randall & Antoni 2011, MSSP 25:485, from memory).
    env = np.abs(hilbert(_band(x, rate, 2500, 5000)))
    assert abs(_peak_hz(env - env.mean(), rate, 40, 300) - BPFO_HZ) <= 0.25


def test_pump_event_list_is_a_jittered_bpfo_train(pump):
    x, rate, events = pump
    assert list(events[0]) == ["time_s", "amplitude", "kind"]
    bearing = np.array([float(e["time_s"]) for e in events if e["kind"] == "bearing"])
    knocks = [e for e in events if e["kind"] == "knock"]
    assert len(bearing) == 348 and len(knocks) == 1
    assert float(knocks[0]["time_s"]) == KNOCK_S and float(knocks[0]["amplitude"]) == 0.40
    ratio = np.diff(bearing) * BPFO_HZ
    assert ratio.min() >= 0.99 and ratio.max() <= 1.01                  # jitter <= 1 %
    assert abs(np.mean(np.diff(bearing)) * BPFO_HZ - 1.0) < 1e-3
    amps = np.array([float(e["amplitude"]) for e in events if e["kind"] == "bearing"])
    assert amps.min() >= 0.07 * 0.85 - 1e-4 and amps.max() <= 0.07 * 1.15 + 1e-4


def test_pump_impacts_are_where_the_list_says(pump):
    from scipy.signal import hilbert
    x, rate, events = pump
    env = np.abs(hilbert(_band(x, rate, 2500, 5000)))
    sigma = _mad_sigma(_band(x, rate, 2500, 5000))
    times = np.array([float(e["time_s"]) for e in events])
    for t in times:
        i = int(round(t * rate))
        after = env[i:i + int(0.0015 * rate)].max()
        before = env[i - int(0.003 * rate):i - int(0.0005 * rate)].max()
        assert after > 2.0 * before, t
    # Nothing loud in the band that the list does not explain.  The FFT band
    # filter is not causal, so an onset shows up to 0.5 ms early.
    early = times - 0.0005
    loud = np.nonzero(env > 6.0 * sigma)[0] / rate
    starts = np.searchsorted(early, loud, side="right") - 1
    since = loud - early[np.clip(starts, 0, None)]
    knock_tail = (loud >= KNOCK_S) & (loud <= KNOCK_S + 0.030)
    assert loud.size > 0
    assert np.all((starts >= 0) & ((since <= 0.0065) | knock_tail))


def test_pump_knock_is_the_largest_peak(pump):
    x, rate, _ = pump
    t_max = np.argmax(np.abs(x)) / rate
    assert KNOCK_S <= t_max <= KNOCK_S + 0.005


# ---------------------------------------------------------------- rig_strain_logger

def _strain_drift(t: np.ndarray) -> np.ndarray:
    # The drift formulas exactly as README.md states them (microstrain).
    return np.stack([35.0 * (1.0 - np.exp(-t / 9.0)),
                     -0.9 * t + 6.0 * np.sin(2.0 * np.pi * t / 60.0),
                     0.05 * t ** 2], axis=1)


@pytest.fixture(scope="module")
def strain():
    comments, rows = _text_rows(SAMPLES / "rig_strain_logger.csv", ";")
    return comments, rows[0], _numbers(rows[1:], decimal_comma=True)


def test_strain_layout(strain):
    comments, header, data = strain
    assert len(comments) == 6
    assert header == ["time [ms]", "strain_A", "strain_B", "strain_C"]
    assert data.shape == (24576, 4)
    assert np.all(np.diff(data[:, 0]) == 1.0) and data[0, 0] == 0.0   # 1 kHz, in ms


def test_strain_cyclic_load(strain):
    _, _, data = strain
    t = data[:, 0] / 1000.0
    for ch in (1, 2, 3):
        y = data[:, ch] - np.polyval(np.polyfit(t, data[:, ch], 3), t)
        # 24.576 s gives 0.0407 Hz bins; 3.2 Hz lies between two of them.
        assert abs(_peak_hz(y, 1000.0, 1.0, 20.0) - 3.2) < 0.041


@pytest.mark.parametrize("when, steps", [(8.250, (40.0, -18.0, 6.0)),
                                          (17.600, (0.0, 0.0, -22.0))])
def test_strain_steps(strain, when, steps):
    _, _, data = strain
    t = data[:, 0] / 1000.0
    # Windows of 0.625 s hold exactly 2 load cycles (3.2 Hz), so the load averages out.
    pre = (t >= when - 0.625) & (t < when)
    post = (t >= when) & (t < when + 0.625)
    drift = _strain_drift(t)
    for k in range(3):
        seen = data[post, k + 1].mean() - data[pre, k + 1].mean()
        expected = steps[k] + drift[post, k].mean() - drift[pre, k].mean()
        assert abs(seen - expected) < 0.5, (k, seen, expected)


def test_strain_drift_over_the_run(strain):
    _, _, data = strain
    t = data[:, 0] / 1000.0
    first = t < 0.625
    last = (t >= 23.9) & (t < 24.525)
    steps = np.array([40.0, -18.0, 6.0 - 22.0])
    drift = _strain_drift(t)
    for k in range(3):
        seen = data[last, k + 1].mean() - data[first, k + 1].mean()
        expected = steps[k] + drift[last, k].mean() - drift[first, k].mean()
        assert abs(seen - expected) < 0.5, (k, seen, expected)


# ---------------------------------------------------------------- field_mic_clicks

@pytest.fixture(scope="module")
def field():
    x, rate = sf.read(str(SAMPLES / "field_mic_clicks.flac"))
    with open(SAMPLES / "field_mic_clicks.events.csv", newline="") as fh:
        clicks = [(float(r["time_s"]), float(r["amplitude"]), [int(c) for c in r["channels"].split()])
                  for r in csv.DictReader(fh)]
    return x, rate, clicks


def test_field_format():
    info = sf.info(str(SAMPLES / "field_mic_clicks.flac"))
    assert (info.format, info.subtype, info.samplerate, info.channels, info.frames) == \
        ("FLAC", "PCM_16", 44100, 2, 154350)


def test_field_clicks_where_and_only_where_stated(field):
    x, rate, clicks = field
    assert len(clicks) == 10
    assert sum(len(ch) == 2 for _, _, ch in clicks) == 5
    for ch in (0, 1):
        hp = _band(x[:, ch], rate, 11025, rate / 2)     # finest dyadic band
        sigma = _mad_sigma(hp)
        mine = [t for t, _, chans in clicks if ch in chans]
        others = [t for t, _, chans in clicks if ch not in chans]
        for t in mine:
            i = int(round(t * rate))
            assert np.abs(hp[i - 9:i + 10]).max() > 8 * sigma, (ch, t)
        for t in others:
            i = int(round(t * rate))
            assert np.abs(hp[i - 9:i + 10]).max() < 5.5 * sigma, (ch, t)
        loud = np.nonzero(np.abs(hp) > 8 * sigma)[0] / rate
        assert all(min(abs(s - t) for t in mine) < 0.0005 for s in loud)


def test_field_birdsong_bands(field):
    x, rate, _ = field
    left = x[:, 0]
    n0, n1 = int(0.20 * rate), int(0.29 * rate)      # first whistle, 2.8 -> 4.6 kHz
    assert 2800 <= _peak_hz(left[n0:n1], rate, 500, 20000) <= 4600
    n0, n1 = int(0.62 * rate), int(0.83 * rate)      # trill only, 6.2 kHz ± 450 Hz
    assert 5750 <= _peak_hz(left[n0:n1], rate, 500, 20000) <= 6650


# ---------------------------------------------------------------- lab_trace_baseline

@pytest.fixture(scope="module")
def lab():
    _, rows = _text_rows(SAMPLES / "lab_trace_baseline.csv", ",")
    return rows[0], _numbers(rows[1:])


def test_lab_layout(lab):
    header, data = lab
    assert header == ["time_s", "signal_mV"]
    assert data.shape == (10240, 2)
    assert np.allclose(np.diff(data[:, 0]), 0.002, atol=1e-9)


def test_lab_pulses_mains_and_wander(lab):
    _, data = lab
    t, y = data[:, 0], data[:, 1]
    # Pulse times from the README: 0.40 s + k * 60/72 s, k = 0..23.
    expected = 0.40 + np.arange(24) * 60.0 / 72.0
    # An 11-sample mean spans 22 ms, 1.1 cycles of 50 Hz, and is symmetric, so it
    # damps the hum that would shift each peak without moving the peak itself.
    smooth = np.convolve(y, np.ones(11) / 11, mode="same")
    local = smooth - np.convolve(y, np.ones(101) / 101, mode="same")   # 0.2 s running mean
    # A pulse is the largest value within ±0.1 s that stands 0.5 mV above the mean.
    peaks = [i for i in range(50, len(y) - 50)
             if local[i] > 0.5 and local[i] == local[i - 50:i + 51].max()]
    assert len(peaks) == 24
    assert np.max(np.abs(t[peaks] - expected)) <= 0.0041          # two samples
    f = np.fft.rfftfreq(len(y), 0.002)
    amp = 2.0 * np.abs(np.fft.rfft(y)) / len(y)
    assert abs(amp[np.argmin(np.abs(f - 50.0))] - 0.06) < 0.005     # 20.48 s: 50 Hz on a bin
    assert 0.25 <= _peak_hz(y - y.mean(), 500.0, 0.2, 1.0) <= 0.35  # baseline wander


# ---------------------------------------------------------------- cooling_loop_logger

def test_cooling_logger_clock_against_fromisoformat():
    # Python's datetime.fromisoformat and csv module read the file independently.
    from datetime import datetime, timedelta

    from scalesieve.io.readers import read_recording

    comments, rows = _text_rows(SAMPLES / "cooling_loop_logger.csv", ",")
    assert len(comments) == 2 and rows[0] == ["timestamp", "pressure [bar]", "flow [l/min]"]
    stamps = [datetime.fromisoformat(r[0]) for r in rows[1:]]
    assert len(stamps) == 2048
    assert stamps[0] == datetime.fromisoformat("2026-03-31T23:59:40+02:00")
    assert stamps[-1] == datetime.fromisoformat("2026-04-01T00:00:20.940+02:00")
    assert set(np.diff([s.timestamp() for s in stamps]).round(6)) == {0.02}
    rec = read_recording(SAMPLES / "cooling_loop_logger.csv")
    assert rec.rate == 50.0 and rec.start_time == stamps[0]
    assert rec.clock_at(22.0) == datetime.fromisoformat("2026-04-01T00:00:02+02:00")
    want = np.array([[float(r[1]), float(r[2])] for r in rows[1:]])
    np.testing.assert_array_equal(rec.samples, want)
    assert rec.units == ["bar", "l/min"]
    # the surge starts at the stated closure time: nothing above the ripple before it
    t = np.arange(2048) / 50.0
    p = want[:, 0]
    assert np.abs(p[t < 22.0] - 2.40).max() < 0.03 + 5 * 0.004
    assert p[(t > 22.0) & (t < 22.3)].max() > 2.40 + 0.5
    assert (stamps[0] + timedelta(seconds=22)).strftime("%H:%M:%S") == "00:00:02"
