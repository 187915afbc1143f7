"""Make Scalesieve's demo recordings from fixed numbers and a fixed seed.

Usage::

    python sample_signals/make_samples.py [OUTDIR] [--force]

OUTDIR defaults to the folder this script lives in.  Every run builds the
same files (same seed, same numbers), so regenerating in place changes
nothing.  A file already in OUTDIR is left alone when it holds the same
data; when it holds *different* data (your own file of the same name, or an
older version of the demo) it is kept and reported, and only ``--force``
replaces it.  Files are written to a temporary name beside the target and
renamed into place, so an interrupted run never leaves half a file.

Only numpy and soundfile are needed.  All scenarios, devices, names and
numbers here are invented for the demo; sample_signals/README.md lists them.
"""

from __future__ import annotations

import argparse
import io
import os
import sys
import tempfile
from pathlib import Path

import numpy as np
import soundfile as sf

# RandomState, not Generator: NumPy freezes RandomState's stream for good
# (NEP 19), so the committed files keep reproducing on newer NumPy releases.
SEED = 52817

# Full scale of 16-bit PCM; soundfile reads int16 back as value / 32768.
PCM16_SCALE = 32768.0


def _rng(offset: int) -> np.random.RandomState:
    # One stream per file so that changing one file never shifts the others.
    return np.random.RandomState(SEED + offset)


def _tone(t: np.ndarray, freq: float, amp: float, phase_deg: float) -> np.ndarray:
    return amp * np.sin(2.0 * np.pi * freq * t + np.deg2rad(phase_deg))


def _add_ring(x: np.ndarray, rate: float, t0: float, amp: float,
              freq: float, tau: float) -> None:
    """Add amp·exp(-(t-t0)/tau)·sin(2π·freq·(t-t0)) for t >= t0, in place.

    Starts at exactly t0 (not the nearest sample) and with zero value, so the
    onset has no step; cut after 12 time constants (exp(-12) ≈ 6e-6).
    """
    first = int(np.ceil(t0 * rate))
    last = min(x.shape[0], int(np.ceil((t0 + 12.0 * tau) * rate)))
    tt = np.arange(first, last) / rate - t0
    x[first:last] += amp * np.exp(-tt / tau) * np.sin(2.0 * np.pi * freq * tt)


# --------------------------------------------------------------------------
# 1. pump_bearing.wav: accelerometer on a pump's bearing housing
# --------------------------------------------------------------------------

PUMP = dict(
    rate=25600, n=102400,                # 4.000 s, 2^12 * 25 samples
    shaft_hz=24.75,                      # 1485 rpm
    shaft=[(1, 0.12, 10.0), (2, 0.04, 75.0), (3, 0.02, 200.0)],  # (order, amp, phase°)
    vanes=7,                             # blade-pass = 7 x shaft = 173.25 Hz
    blade=[(1, 0.05, 30.0), (2, 0.015, 140.0)],
    mains_hz=50.0,
    mains=[(1, 0.03, 0.0), (2, 0.008, 60.0), (3, 0.005, 250.0)],
    settle_amp=0.05, settle_tau=1.2,     # sensor settling after power-on
    noise_sigma=0.008,
    bpfo_hz=87.3,                        # outer-race defect rate
    first_impact_s=0.010, jitter_frac=0.004, last_impact_before_s=3.988,
    impact_amp=0.07, impact_amp_spread=0.15,
    impact_ring_hz=3600.0, impact_tau_s=0.001,
    knock_s=2.618, knock_amp=0.40, knock_ring_hz=1900.0, knock_tau_s=0.0025,
)


def pump_bearing() -> tuple[np.ndarray, list[tuple[float, float, str]]]:
    """Return (int16 samples, events) for the pump demo."""
    p = PUMP
    rng = _rng(1)
    rate, n = p["rate"], p["n"]
    t = np.arange(n) / rate
    x = np.zeros(n)
    for order, amp, ph in p["shaft"]:
        x += _tone(t, order * p["shaft_hz"], amp, ph)
    for order, amp, ph in p["blade"]:
        x += _tone(t, order * p["vanes"] * p["shaft_hz"], amp, ph)
    for order, amp, ph in p["mains"]:
        x += _tone(t, order * p["mains_hz"], amp, ph)
    x += p["settle_amp"] * np.exp(-t / p["settle_tau"])
    x += rng.standard_normal(n) * p["noise_sigma"]

    period = 1.0 / p["bpfo_hz"]
    count = int(np.floor((p["last_impact_before_s"] - p["first_impact_s"]) / period)) + 1
    # Jitter on each impact's position (not accumulated), so the mean rate
    # stays exactly BPFO and consecutive intervals stay within ±2·jitter.
    jitter = rng.uniform(-p["jitter_frac"], p["jitter_frac"], count) * period
    spread = rng.uniform(-p["impact_amp_spread"], p["impact_amp_spread"], count)
    events = []
    for k in range(count):
        # Round first, then synthesise, so the sidecar is exact for the file.
        tk = round(p["first_impact_s"] + k * period + jitter[k], 6)
        ak = round(p["impact_amp"] * (1.0 + spread[k]), 4)
        _add_ring(x, rate, tk, ak, p["impact_ring_hz"], p["impact_tau_s"])
        events.append((tk, ak, "bearing"))
    _add_ring(x, rate, p["knock_s"], p["knock_amp"], p["knock_ring_hz"], p["knock_tau_s"])
    events.append((p["knock_s"], p["knock_amp"], "knock"))
    events.sort()
    return _to_pcm16(x), events


# --------------------------------------------------------------------------
# 1b. fan_bearing.wav: the diagnosis path (packet kurtosis, envelope, bearing lines)
# --------------------------------------------------------------------------

FAN = dict(
    rate=25600, n=153600,                # 6.000 s
    shaft_hz=29.5,                       # 1770 rpm
    shaft=[(1, 0.10, 40.0), (2, 0.03, 110.0)],   # (order, amp, phase°)
    blades=6,                            # blade pass 6 x shaft = 177 Hz
    blade=[(1, 0.04, 15.0)],
    noise_sigma=0.01,
    # invented bearing: 10 rolling elements, element 8.0 mm, pitch 42.0 mm, 0°
    elements=10, element_d=8.0, pitch_d=42.0, angle_deg=0.0,
    first_impact_s=0.005, slip_frac=0.01,
    impact_amp=0.05, impact_amp_spread=0.2,
    impact_ring_hz=5200.0, impact_tau_s=0.0006,
)


def fan_bpfo_hz() -> float:
    """BPFO of the invented fan bearing: n f_r / 2 (1 - d/D cos phi) (Randall & Antoni 2011)."""
    f = FAN
    r = f["element_d"] / f["pitch_d"] * np.cos(np.deg2rad(f["angle_deg"]))
    return f["elements"] * f["shaft_hz"] / 2.0 * (1.0 - r)


def fan_bearing() -> np.ndarray:
    """Return int16 samples for the fan demo: an outer-race defect ringing at 5.2 kHz."""
    f = FAN
    rng = _rng(5)
    rate, n = f["rate"], f["n"]
    t = np.arange(n) / rate
    x = np.zeros(n)
    for order, amp, ph in f["shaft"]:
        x += _tone(t, order * f["shaft_hz"], amp, ph)
    for order, amp, ph in f["blade"]:
        x += _tone(t, order * f["blades"] * f["shaft_hz"], amp, ph)
    x += rng.standard_normal(n) * f["noise_sigma"]
    period = 1.0 / fan_bpfo_hz()
    count = int(np.floor((n / rate - 0.02 - f["first_impact_s"]) / period)) + 1
    # rolling elements slip: each interval is off by up to ±slip, not accumulated
    jitter = rng.uniform(-f["slip_frac"], f["slip_frac"], count) * period
    spread = rng.uniform(-f["impact_amp_spread"], f["impact_amp_spread"], count)
    for k in range(count):
        tk = round(f["first_impact_s"] + k * period + jitter[k], 6)
        ak = round(f["impact_amp"] * (1.0 + spread[k]), 4)
        _add_ring(x, rate, tk, ak, f["impact_ring_hz"], f["impact_tau_s"])
    return _to_pcm16(x)


# --------------------------------------------------------------------------
# 2. rig_strain_logger.csv: bench logger export, semicolon + decimal comma
# --------------------------------------------------------------------------

STRAIN = dict(
    rate=1000, n=24576,                  # 24.576 s, 2^13 * 3 samples
    load_hz=3.2,
    channels=[
        # name, offset, load amp, load phase°, noise σ   (all microstrain)
        ("strain_A", 120.0, 60.0, 0.0, 1.5),
        ("strain_B", -40.0, 25.0, 180.0, 1.5),
        ("strain_C", 15.0, 10.0, 90.0, 1.5),
    ],
    c_second_harmonic=4.0,               # strain_C: 6.4 Hz, amp 4 µε
    b_mains_amp=1.2,                     # strain_B: 50 Hz pickup, 1.2 µε
    # drift: A warm-up 35·(1-exp(-t/9 s)); B -0.9 µε/s linear + 6·sin(2π t/60 s);
    # C +0.05 µε/s² · t² (quadratic).
    load_step_s=8.250, load_step=(40.0, -18.0, 6.0),
    zero_step_s=17.600, zero_step_c=-22.0,
)


def _strain_channels() -> tuple[np.ndarray, np.ndarray]:
    s = STRAIN
    rng = _rng(2)
    rate, n = s["rate"], s["n"]
    t = np.arange(n) / rate
    after_load = (t >= s["load_step_s"]).astype(float)
    after_zero = (t >= s["zero_step_s"]).astype(float)
    drift = [
        35.0 * (1.0 - np.exp(-t / 9.0)),
        -0.9 * t + 6.0 * np.sin(2.0 * np.pi * t / 60.0),
        0.05 * t ** 2,
    ]
    cols = []
    for i, (name, offset, amp, ph, sigma) in enumerate(s["channels"]):
        y = offset + drift[i] + _tone(t, s["load_hz"], amp, ph)
        y = y + s["load_step"][i] * after_load
        if name == "strain_C":
            y = y + _tone(t, 2 * s["load_hz"], s["c_second_harmonic"], 0.0)
            y = y + s["zero_step_c"] * after_zero
        if name == "strain_B":
            y = y + _tone(t, 50.0, s["b_mains_amp"], 0.0)
        y = y + rng.standard_normal(n) * sigma
        cols.append(y)
    return t, np.stack(cols, axis=1)


def _comma(v: float, digits: int) -> str:
    # + 0.0 turns a rounded -0.0 into 0.0 so no "-0,00" appears.
    return f"{round(float(v), digits) + 0.0:.{digits}f}".replace(".", ",")


def rig_strain_logger() -> bytes:
    """Return the logger export as bytes (ASCII, LF line ends)."""
    s = STRAIN
    t, y = _strain_channels()
    lines = [
        "# Logger: demo bridge logger, 4 channels (invented for the Scalesieve demo)",
        "# Test: rig 2, welded bracket, cyclic bending at 3.2 Hz, run 17",
        "# Start: 2024-03-14 09:12:05",
        f"# Sample rate: {s['rate']} Hz",
        "# Units: time in ms; strain in microstrain",
        "# strain_A top flange, strain_B bottom flange, strain_C web",
        "time [ms];" + ";".join(c[0] for c in s["channels"]),
    ]
    for i in range(t.shape[0]):
        cells = [_comma(i * 1000.0 / s["rate"], 3)]
        cells += [_comma(v, 2) for v in y[i]]
        lines.append(";".join(cells))
    return ("\n".join(lines) + "\n").encode("ascii")


# --------------------------------------------------------------------------
# 3. field_mic_clicks.flac: stereo field recording with birds, hiss, clicks
# --------------------------------------------------------------------------

FIELD = dict(
    rate=44100, n=154350,                # 3.500 s
    # Whistle: upward sweeps 2.8 -> 4.6 kHz, 90 ms, Hann envelope, every 0.32 s
    whistle=dict(f0=2800.0, f1=4600.0, dur=0.090, amp=0.12, first=0.20,
                 every=0.32, count=10, gain=(1.0, 0.6), delay_s=(0.0, 0.00035)),
    # Trill: 6.2 kHz carrier, ±450 Hz sinusoidal FM at 35 Hz, two phrases
    trill=dict(fc=6200.0, dev=450.0, fm=35.0, amp=0.06, ramp=0.030,
               phrases=((0.55, 1.45), (2.10, 3.20)), gain=(0.5, 1.0)),
    hiss_sigma=(0.008, 0.009),
    click_sigma_s=20e-6,                 # Gaussian-derivative width
    # (time s, amplitude, channels) -- fixed, not random, so they are easy to quote
    clicks=[
        (0.3125, 0.45, (0, 1)),
        (0.6870, 0.30, (0,)),
        (0.9911, 0.55, (0, 1)),
        (1.2504, 0.25, (1,)),
        (1.6033, 0.40, (0, 1)),
        (1.9876, 0.35, (0,)),
        (2.2450, 0.60, (0, 1)),
        (2.6021, 0.28, (1,)),
        (2.9388, 0.50, (0, 1)),
        (3.2207, 0.32, (0,)),
    ],
)


def _hann_burst(t: np.ndarray, start: float, dur: float) -> np.ndarray:
    u = (t - start) / dur
    return np.where((u >= 0) & (u <= 1), 0.5 - 0.5 * np.cos(2 * np.pi * u), 0.0)


def _ramped_gate(t: np.ndarray, start: float, stop: float, ramp: float) -> np.ndarray:
    up = np.clip((t - start) / ramp, 0.0, 1.0)
    down = np.clip((stop - t) / ramp, 0.0, 1.0)
    g = np.minimum(up, down)
    return 0.5 - 0.5 * np.cos(np.pi * g)


def field_mic_clicks() -> tuple[np.ndarray, list[tuple[float, float, tuple[int, ...]]]]:
    """Return (int16 samples of shape (n, 2), clicks) for the field demo."""
    f = FIELD
    rng = _rng(3)
    rate, n = f["rate"], f["n"]
    t = np.arange(n) / rate
    x = np.zeros((n, 2))
    w = f["whistle"]
    for ch in range(2):
        tc = t - w["delay_s"][ch]
        for m in range(w["count"]):
            start = w["first"] + m * w["every"]
            tau = tc - start
            # Linear sweep: phase = 2π(f0·τ + (f1-f0)·τ²/(2·dur)).
            phase = 2 * np.pi * (w["f0"] * tau + (w["f1"] - w["f0"]) * tau ** 2 / (2 * w["dur"]))
            x[:, ch] += w["gain"][ch] * w["amp"] * _hann_burst(tc, start, w["dur"]) * np.sin(phase)
    tr = f["trill"]
    trill_phase = 2 * np.pi * tr["fc"] * t - (tr["dev"] / tr["fm"]) * np.cos(2 * np.pi * tr["fm"] * t)
    trill = np.zeros(n)
    for a, b in tr["phrases"]:
        trill += _ramped_gate(t, a, b, tr["ramp"])
    trill *= tr["amp"] * np.sin(trill_phase)
    for ch in range(2):
        x[:, ch] += tr["gain"][ch] * trill
        x[:, ch] += rng.standard_normal(n) * f["hiss_sigma"][ch]
    sig = f["click_sigma_s"]
    half = int(np.ceil(8 * sig * rate))
    for tk, ak, chans in f["clicks"]:
        centre = int(round(tk * rate))
        idx = np.arange(centre - half, centre + half + 1)
        u = (idx / rate - tk) / sig
        # Gaussian derivative scaled so its extremes are ±ak: sharp, zero-mean.
        shape = -ak * u * np.exp(0.5 - 0.5 * u ** 2)
        for ch in chans:
            x[idx, ch] += shape
    return _to_pcm16(x), list(f["clicks"])


# --------------------------------------------------------------------------
# 4. lab_trace_baseline.csv: physiology-style trace (research use only)
# --------------------------------------------------------------------------

LAB = dict(
    rate=500, n=10240,                   # 20.48 s, 2^11 * 5 samples
    pulse_per_min=72.0, first_pulse_s=0.40,
    # bumps relative to each pulse time: (offset s, amp mV, width σ s)
    bumps=[(-0.180, 0.12, 0.025), (-0.035, -0.10, 0.008), (0.000, 1.00, 0.010),
           (0.030, -0.20, 0.009), (0.260, 0.28, 0.045)],
    offset_mv=0.05,
    wander=[(0.30, 0.25, 20.0), (0.07, 0.10, 110.0)],  # (Hz, mV, phase°)
    mains=[(50.0, 0.06, 0.0), (150.0, 0.015, 45.0)],
    noise_sigma=0.02,
)


def lab_pulse_times() -> np.ndarray:
    """Pulse (tall bump) times: all whose last bump ends inside the trace."""
    p = LAB
    period = 60.0 / p["pulse_per_min"]
    dur = p["n"] / p["rate"]
    k = np.arange(int(dur / period) + 1)
    tk = p["first_pulse_s"] + k * period
    return tk[tk + 0.40 < dur]


def lab_trace_baseline() -> bytes:
    p = LAB
    rng = _rng(4)
    rate, n = p["rate"], p["n"]
    t = np.arange(n) / rate
    y = np.full(n, p["offset_mv"])
    for tk in lab_pulse_times():
        for off, amp, width in p["bumps"]:
            y += amp * np.exp(-0.5 * ((t - tk - off) / width) ** 2)
    for hz, amp, ph in p["wander"] + p["mains"]:
        y += _tone(t, hz, amp, ph)
    y += rng.standard_normal(n) * p["noise_sigma"]
    lines = ["time_s,signal_mV"]
    lines += [f"{i / rate:.3f},{round(float(v), 4) + 0.0:.4f}" for i, v in enumerate(y)]
    return ("\n".join(lines) + "\n").encode("ascii")


# --------------------------------------------------------------------------
# 5. cooling_loop_logger.csv: a clocked logger export (ISO 8601 timestamps)
# --------------------------------------------------------------------------

COOLING = dict(
    rate=50, n=2048,                          # 40.96 s, one row per 20 ms
    # Local time with its UTC offset, across midnight and the end of March.
    start="2026-03-31 23:59:40.000+02:00",
    pressure_bar=2.40, flow_lpm=118.0,         # steady values before the valve closes
    pump_hz=1.25, pump_amp_bar=0.03,          # pressure ripple of the circulating pump
    valve_close_s=22.0,                       # 00:00:02.000 local time, on the next day
    surge_bar=0.65, surge_hz=3.5, surge_decay_s=1.2,   # damped pressure ring at the valve
    flow_after_lpm=96.0, flow_tau_s=0.8,      # flow settles lower after the closure
    noise_bar=0.004, noise_lpm=0.35,
)


def cooling_loop_logger() -> bytes:
    """An invented cooling-water loop logger: pressure and flow with a valve surge."""
    from datetime import datetime, timedelta

    c = COOLING
    rng = _rng(5)
    rate, n = c["rate"], c["n"]
    t = np.arange(n) / rate
    after = np.clip(t - c["valve_close_s"], 0.0, None)
    on = t >= c["valve_close_s"]
    p = c["pressure_bar"] + _tone(t, c["pump_hz"], c["pump_amp_bar"], 0.0)
    p += on * c["surge_bar"] * np.exp(-after / c["surge_decay_s"]) * np.sin(
        2 * np.pi * c["surge_hz"] * after)
    q = c["flow_lpm"] - on * (c["flow_lpm"] - c["flow_after_lpm"]) * (
        1 - np.exp(-after / c["flow_tau_s"]))
    p += rng.standard_normal(n) * c["noise_bar"]
    q += rng.standard_normal(n) * c["noise_lpm"]
    t0 = datetime.fromisoformat(c["start"])
    lines = ["# Logger: demo loop logger CL-2 (invented for the Scalesieve demo)",
             "# Site: cooling-water loop, return line after the heat exchanger",
             "timestamp,pressure [bar],flow [l/min]"]
    for i in range(n):
        stamp = (t0 + timedelta(milliseconds=20 * i)).isoformat(sep=" ",
                                                                 timespec="milliseconds")
        lines.append(f"{stamp},{round(float(p[i]), 4) + 0.0:.4f},"
                     f"{round(float(q[i]), 2) + 0.0:.2f}")
    return ("\n".join(lines) + "\n").encode("ascii")


# --------------------------------------------------------------------------
# encoding and writing
# --------------------------------------------------------------------------

def _to_pcm16(x: np.ndarray) -> np.ndarray:
    peak = float(np.max(np.abs(x)))
    # Demo files must never clip; fail loudly if a number change makes them.
    if peak >= 0.9:
        raise RuntimeError(f"demo signal peak {peak:.3f} is too close to full scale")
    return np.round(x * PCM16_SCALE).astype(np.int16)


def _audio_bytes(samples: np.ndarray, rate: int, fmt: str) -> bytes:
    buf = io.BytesIO()
    sf.write(buf, samples, rate, format=fmt, subtype="PCM_16")
    return buf.getvalue()


def build_all() -> dict[str, tuple[bytes, tuple | None]]:
    """All demo files: name -> (bytes, (samples, rate) for audio or None)."""
    out: dict[str, tuple[bytes, tuple | None]] = {}
    pump, pump_events = pump_bearing()
    out["pump_bearing.wav"] = (_audio_bytes(pump, PUMP["rate"], "WAV"), (pump, PUMP["rate"]))
    rows = ["time_s,amplitude,kind"] + [f"{t:.6f},{a:.4f},{k}" for t, a, k in pump_events]
    out["pump_bearing.events.csv"] = (("\n".join(rows) + "\n").encode("ascii"), None)
    fan = fan_bearing()
    out["fan_bearing.wav"] = (_audio_bytes(fan, FAN["rate"], "WAV"), (fan, FAN["rate"]))
    out["rig_strain_logger.csv"] = (rig_strain_logger(), None)
    mic, clicks = field_mic_clicks()
    out["field_mic_clicks.flac"] = (_audio_bytes(mic, FIELD["rate"], "FLAC"), (mic, FIELD["rate"]))
    rows = ["time_s,amplitude,channels"] + [
        f"{t:.4f},{a:.2f},{' '.join(str(c) for c in ch)}" for t, a, ch in clicks]
    out["field_mic_clicks.events.csv"] = (("\n".join(rows) + "\n").encode("ascii"), None)
    out["lab_trace_baseline.csv"] = (lab_trace_baseline(), None)
    out["cooling_loop_logger.csv"] = (cooling_loop_logger(), None)
    return out


def _same_data(path: Path, data: bytes, audio: tuple | None) -> bool:
    if path.read_bytes() == data:
        return True
    if audio is None:
        return False
    # FLAC bytes carry the encoder's version string; equal samples are equal data.
    samples, rate = audio
    try:
        have, have_rate = sf.read(str(path), dtype="int16", always_2d=False)
    except (RuntimeError, sf.LibsndfileError):
        return False
    return have_rate == rate and have.shape == samples.shape and np.array_equal(have, samples)


def _write_atomic(path: Path, data: bytes) -> None:
    fd, tmp = tempfile.mkstemp(prefix="." + path.name + ".", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        # mkstemp makes the file private (0600); give it the usual umask mode.
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        prog="make_samples.py",
        description="Write Scalesieve's demo recordings (same bytes every run).")
    parser.add_argument("outdir", nargs="?", default=str(Path(__file__).resolve().parent),
                        help="folder to write into (default: this script's folder)")
    parser.add_argument("--force", action="store_true",
                        help="replace files of the same name that hold different data")
    args = parser.parse_args(argv)
    outdir = Path(args.outdir)
    try:
        outdir.mkdir(parents=True, exist_ok=True)
        kept = 0
        for name, (data, audio) in build_all().items():
            path = outdir / name
            if path.exists():
                if _same_data(path, data, audio):
                    print(f"unchanged  {path}")
                    continue
                if not args.force:
                    print(f"kept       {path} (holds different data; --force replaces it)",
                          file=sys.stderr)
                    kept += 1
                    continue
            _write_atomic(path, data)
            print(f"wrote      {path} ({len(data)} bytes)")
    except OSError as exc:
        print(f"make_samples.py: error: {exc.filename or outdir}: {exc.strerror or exc}",
              file=sys.stderr)
        return 2
    return 1 if kept else 0


if __name__ == "__main__":
    sys.exit(main())
