"""Transient detection and repetition (scalesieve.core.events), checked from outside.

Sources of the expected values are named beside each check: the normal
distribution (scipy.stats.norm), scikit-image's noise estimate, SciPy's
linear regression, the published support length of wavelet filters,
invented recordings whose event times are set here, and PyWavelets'
bundled ECG record.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import pywt
from scipy import stats

from scalesieve.core import events as ev
from scalesieve.core import transforms as tf
from scalesieve.core.recording import Recording
from scalesieve.model import DecompositionModel


def _spec(kind="swt", wavelet="db4", n=4096, level=None, mode="symmetric"):
    return tf.TransformSpec(kind=kind, wavelet=wavelet, level=level, mode=mode).resolved(n)


def _bursts(times, rate, n, rng, amp=0.3, noise=0.01, decay=0.0008, freqs=(2500, 6000)):
    """Invented recording: decaying tone bursts starting exactly at ``times``."""
    x = rng.normal(0.0, noise, n)
    t = np.arange(n) / rate
    for tk in times:
        f = rng.uniform(*freqs)
        i0 = int(math.ceil(tk * rate))
        seg = t[i0:i0 + int(12 * decay * rate)] - tk
        x[i0:i0 + seg.size] += amp * np.exp(-seg / decay) * np.sin(2 * np.pi * f * seg)
    return x


# --------------------------------------------------------------------------
# the coefficients detection uses are the transform's own


@pytest.mark.parametrize("kind", ["dwt", "swt"])
@pytest.mark.parametrize("wavelet", ["db4", "haar", "sym8", "bior3.5"])
def test_detail_bands_equal_the_full_transform(kind, wavelet):
    x = np.random.default_rng(3).standard_normal(5003)
    spec = _spec(kind, wavelet, x.size)
    full = tf.forward(x, spec) if kind == "dwt" else _quiet_forward(x, spec)
    part = ev.detail_bands(x, spec, (1, 2, 3))
    for j in (1, 2, 3):
        # bit-identical: the window's Scale map and the events see the same numbers
        assert np.array_equal(part[j], full[tf.band_index(j, spec.level)])


def _quiet_forward(x, spec):
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        return tf.forward(x, spec)


@pytest.mark.parametrize("kind", ["dwt", "swt"])
@pytest.mark.parametrize("wavelet", ["haar", "db2", "db4", "db8", "sym5", "coif2"])
@pytest.mark.parametrize("j", [1, 2, 3])
def test_support_has_the_published_length(kind, wavelet, j):
    # Equivalent filter of level j in a two-channel filter bank with filters of
    # length L: (L - 1)(2^j - 1) + 1 taps (common practice; e.g. Strang & Nguyen,
    # Wavelets and Filter Banks, 1996, from memory).  The support is also where
    # the coefficient's centre lies.
    L = pywt.Wavelet(wavelet).dec_len
    spec = _spec(kind, wavelet, 4096)
    first, last = ev.support(spec, j)
    assert last - first + 1 == (L - 1) * (2 ** j - 1) + 1
    centre = tf.coefficient_positions(j, spec, 1)[0]
    assert first <= centre <= last


# --------------------------------------------------------------------------
# noise: false alarms on white Gaussian noise


def test_noise_sigma_matches_scikit_image():
    # scikit-image's estimate_sigma is median|d1| / Phi^-1(0.75) on a db2 DWT.
    from skimage.restoration import estimate_sigma

    x = np.random.default_rng(11).normal(0.0, 0.37, 200_000)
    spec = _spec("dwt", "db2", x.size)
    (band,) = ev.prepare_signal(x, spec, (1,))
    # ours leaves out the two boundary coefficients at each end
    assert band.sigma == pytest.approx(estimate_sigma(x), rel=1e-4)


@pytest.mark.parametrize("wavelet", ["haar", "db4"])
@pytest.mark.parametrize("k", [2.5, 3.0, 3.5, 4.0])
def test_event_count_on_white_noise_follows_the_normal_tail(wavelet, k):
    # An orthonormal DWT maps white Gaussian noise to white Gaussian noise
    # (Mallat, Wavelet Tour), so each level-1 coefficient exceeds k*sigma
    # independently with p = 2(1 - Phi(k)) (scipy.stats.norm).  An event
    # starts at an exceedance with none among the D coefficients before it
    # whose supports it touches: D = floor(S / 2) for support length S
    # (published length, see above), so E[count] = N p (1-p)^D.
    rng = np.random.default_rng(20240 + int(10 * k))
    x = rng.standard_normal(1 << 19)
    spec = _spec("dwt", wavelet, x.size)
    bands = ev.prepare_signal(x, spec, (1,))
    N = bands[0].coeffs.size
    events = ev.detect(bands, x, 1.0, k)
    L = pywt.Wavelet(wavelet).dec_len
    D = L // 2        # S = L at level 1, step 2
    p = 2.0 * stats.norm.sf(k)
    expected = N * p * (1.0 - p) ** D
    # Tolerance: binomial spread of the count plus the spread the MAD estimate
    # of sigma adds (relative SE 1.166/sqrt(N), from the asymptotic variance
    # of a sample median; common practice), four standard deviations.
    sd_binom = math.sqrt(expected * (1.0 - p))
    sd_sigma = N * 2.0 * stats.norm.pdf(k) * k * 1.166 / math.sqrt(N)
    assert abs(len(events) - expected) <= 4.0 * math.hypot(sd_binom, sd_sigma), \
        (len(events), expected)


def test_silent_recording_has_no_events():
    x = np.zeros(4096)
    events, bands = ev.find_events(x, 1000.0, _spec("swt", n=x.size))
    assert events == [] and all(b.sigma == 0.0 for b in bands)


# --------------------------------------------------------------------------
# merging and the fields of an event (hand-made coefficients)


def _band(level, values, step, reach, sigma=1.0, index0=0, centre0=0.0):
    return ev.LevelBand(level=level, coeffs=np.asarray(values, dtype=float), index0=index0,
                        step=step, centre0=centre0, reach=reach, sigma=sigma)


def test_touching_supports_merge_and_separate_ones_do_not():
    # level 1, step 2, each coefficient reads 4 samples: [2i, 2i+3]
    c = np.zeros(50)
    c[3] = 6.0      # samples 6-9
    c[5] = -8.0     # samples 10-13: next to 6-9, so one event
    c[9] = 7.0      # samples 18-21: a gap of 4 samples, a second event
    x = np.zeros(120)
    x[11] = -0.9
    x[19] = 0.4
    b = _band(1, c, step=2, reach=(0, 3), centre0=1.5)
    events = ev.detect([b], x, 10.0, 5.0, channel=3)
    assert [(e.start_s, e.stop_s) for e in events] == [(0.6, 1.3), (1.8, 2.1)]
    first, second = events
    assert first.score == 8.0 and first.level == 1 and first.peak_s == pytest.approx(1.15)
    assert first.peak == pytest.approx(0.9) and second.peak == pytest.approx(0.4)
    assert {e.channel for e in events} == {3}


def test_exceedances_merge_across_levels_and_the_strongest_names_the_level():
    c1 = np.zeros(40)
    c1[10] = 6.0                 # level 1: samples 20-23
    c2 = np.zeros(20)
    c2[6] = 12.0                 # level 2 (sigma 2, score 6.0): samples 22-29
    c2[15] = 30.0                # level 2 alone: samples 58-65, score 15
    bands = [_band(1, c1, 2, (0, 3)), _band(2, c2, 4, (-2, 5), sigma=2.0, centre0=1.5)]
    x = np.zeros(100)
    events = ev.detect(bands, x, 1.0, 5.0)
    assert [(e.start_s, e.stop_s) for e in events] == [(20.0, 29.0), (58.0, 65.0)]
    assert events[0].score == 6.0 and events[0].level in (1, 2)
    assert events[1].score == 15.0 and events[1].level == 2
    assert events[1].peak_s == pytest.approx(1.5 + 4 * 15)


def test_threshold_is_strict_and_k_is_checked():
    c = np.array([5.0, -5.0000001, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0])
    events = ev.detect([_band(1, c, 1, (0, 0))], np.zeros(8), 1.0, 5.0)
    assert len(events) == 1 and events[0].start_s == 1.0   # |c| > k sigma, not >=
    for bad in (0, -1, float("nan"), float("inf"), "x"):
        with pytest.raises(ValueError):
            ev.check_k(bad)


def test_levels_are_checked_against_the_transform():
    assert ev.check_levels((2, 1, 2), 5) == (1, 2)
    assert ev.check_levels("details", 3) == (1, 2, 3)
    for bad in (("a",), (0,), (6,), ()):
        with pytest.raises(ValueError):
            ev.check_levels(bad, 5)


def test_nothing_is_found_where_the_support_leaves_the_recording():
    # A logger trace drifting from 0 to 5 units: the SWT wraps the end round
    # to the start, a jump of 5 that is not in the data.  Coefficients that
    # read beyond either end are left out, so only the real step at 6 s counts.
    rng = np.random.default_rng(5)
    n = 8192
    x = rng.normal(0, 0.01, n) + np.linspace(0.0, 5.0, n) + np.where(np.arange(n) < 6000, 0.0, 2.0)
    events, bands = ev.find_events(x, 1000.0, _spec("swt", n=n))
    assert len(events) == 1 and 5.98 < events[0].start_s < 6.0 < events[0].stop_s
    for b in bands:
        assert b.step * b.index0 + b.reach[0] >= 0
        assert b.step * (b.index0 + b.coeffs.size - 1) + b.reach[1] <= x.size - 1


# --------------------------------------------------------------------------
# timing: invented bursts at known times


RATE = 20_000.0


def _known_bursts():
    rng = np.random.default_rng(7)
    # a line recorder catching switching transients: 40 bursts, at least 30 ms apart
    times = np.cumsum(rng.uniform(0.03, 0.4, 40)) + 0.05
    n = int((times[-1] + 0.1) * RATE)
    x = _bursts(times, RATE, n, rng)
    x += 0.5 * np.sin(2 * np.pi * 50.0 * np.arange(n) / RATE)    # mains, far below d2
    return times, x


def test_bursts_are_found_within_a_few_milliseconds():
    times, x = _known_bursts()
    events, _ = ev.find_events(x, RATE, _spec(n=x.size))       # SWT, db4, levels 1-2, k 5
    assert len(events) == len(times)
    for e, tk in zip(events, times):
        # the event holds the onset; start and strongest coefficient within 2 ms
        assert e.start_s <= tk <= e.stop_s
        assert abs(e.start_s - tk) < 0.002 and abs(e.peak_s - tk) < 0.002
        assert e.peak > 0.2 and e.score > 5


def test_swt_times_onsets_more_steadily_than_dwt():
    # The documented default: the SWT's start times scatter less around the
    # true onsets than the DWT's, which sees every 2**j-th position only.
    times, x = _known_bursts()
    scatter = {}
    for kind in ("dwt", "swt"):
        events, _ = ev.find_events(x, RATE, _spec(kind, n=x.size))
        starts = np.array([e.start_s for e in events])
        err = [starts[np.argmin(np.abs(starts - tk))] - tk for tk in times]
        scatter[kind] = float(np.std(err))
    assert ev.DEFAULT_KIND == "swt"
    # The README and core/events.py say "about five times" (0.02 against 0.10 ms):
    # checked as a ratio between 4 and 7.
    assert 4.0 < scatter["dwt"] / scatter["swt"] < 7.0, scatter
    assert scatter["swt"] == pytest.approx(0.02e-3, abs=0.01e-3)
    assert scatter["dwt"] == pytest.approx(0.10e-3, abs=0.03e-3)


# --------------------------------------------------------------------------
# repetition


def test_repetition_of_an_invented_impact_train_is_within_one_percent():
    # A gearbox accelerometer at 20 kHz: impacts at 61.8 Hz, each time jittered
    # by up to 1 % of the interval, amplitudes 0.15-0.3, over a 35 Hz shaft tone.
    rng = np.random.default_rng(61)
    rate_true = 61.8
    k = np.arange(180)
    times = 0.02 + k / rate_true + rng.uniform(-0.01, 0.01, k.size) / rate_true
    n = int((times[-1] + 0.05) * RATE)
    x = rng.normal(0.0, 0.01, n)
    tt = np.arange(n) / RATE
    x += 0.4 * np.sin(2 * np.pi * 35.0 * tt)
    for tk in times:
        i0 = int(math.ceil(tk * RATE))
        seg = tt[i0:i0 + 200] - tk
        x[i0:i0 + seg.size] += rng.uniform(0.15, 0.3) * np.exp(-seg / 0.0007) * \
            np.sin(2 * np.pi * 4200.0 * seg)
    events, _ = ev.find_events(x, RATE, _spec(n=x.size))
    rep = ev.repetition([e.start_s for e in events])
    assert rep is not None
    assert rep.rate_hz == pytest.approx(rate_true, rel=0.01)
    assert rep.interval_s == pytest.approx(1.0 / rate_true, rel=0.01)
    assert rep.count >= 0.95 * times.size
    # jitter of +-1 % per time: single intervals spread by about 0.8 % of the period
    assert 0.001 < rep.spread_s * rate_true < 0.02
    assert rep.spread_hz == pytest.approx(rep.spread_s * rep.rate_hz ** 2)


def test_repetition_slope_agrees_with_scipy_linregress():
    rng = np.random.default_rng(2)
    period = 0.0123
    cycles = np.arange(200)
    t = 0.5 + period * cycles + rng.normal(0, 0.0002, cycles.size)
    ref = stats.linregress(cycles, t).slope     # SciPy least squares
    rep = ev.repetition(t)
    assert rep.interval_s == pytest.approx(ref, rel=1e-9)
    assert rep.count == 200 and rep.intervals == 199


def test_missed_and_stray_events_do_not_move_the_period():
    t = 0.003 + 0.01 * np.arange(100)
    clean = ev.repetition(t)
    gappy = np.delete(t, [10, 50, 51, 77])                      # missed impacts
    stray = np.sort(np.concatenate([t, [0.2345, 0.6071, 0.6102]]))  # extra clicks
    for times in (gappy, stray):
        rep = ev.repetition(times)
        assert rep.interval_s == pytest.approx(0.01, rel=1e-9)
        assert rep.rate_hz == pytest.approx(100.0, rel=1e-9)
    assert clean.count == 100 and ev.repetition(gappy).count == 96
    assert ev.repetition(stray).count == 100


def test_no_train_in_random_times_or_too_few_events():
    rng = np.random.default_rng(0)
    assert ev.repetition(np.sort(rng.uniform(0, 10, 300))) is None    # Poisson-like
    assert ev.repetition([0.1, 0.2]) is None
    assert ev.repetition([]) is None
    # irregular clicks: a loose period fits some intervals, the spread gives it away
    assert ev.repetition([0.3125, 0.9911, 1.2504, 1.6033, 2.2450, 2.6021, 2.9388]) is None


# --------------------------------------------------------------------------
# PyWavelets' bundled ECG (research use only; no diagnostic claim)


def test_ecg_beats_are_found_at_a_plausible_count():
    # pywt.data.ecg: 1024 samples of an ECG record at 360 Hz.  This checks
    # that detection finds a plausible number of beat transients; it is a
    # research/teaching check and says nothing about the person's health.
    x = pywt.data.ecg().astype(np.float64)
    rate = 360.0
    events, _ = ev.find_events(x, rate, _spec(n=x.size))
    duration_min = x.size / rate / 60.0
    # a resting rate of 60-100 per minute is common practice
    assert math.floor(60 * duration_min) <= len(events) <= math.ceil(100 * duration_min)
    rep = ev.repetition([e.start_s for e in events])
    assert rep is not None and 60.0 <= 60.0 * rep.rate_hz <= 100.0


# --------------------------------------------------------------------------
# the model gives the same events as the core functions


def test_model_events_equal_the_core_path_for_every_channel():
    rng = np.random.default_rng(9)
    a = _bursts([0.1, 0.35, 0.8], RATE, 20_000, rng)
    b = _bursts([0.2, 0.35], RATE, 20_000, rng, amp=0.5)
    rec = Recording(np.column_stack([a, b]), RATE, ["left", "right"])
    model = DecompositionModel(rec, tf.TransformSpec("dwt", "db4"))
    for kind in ("swt", "dwt"):
        found, noise = model.events((1, 2), 5.0, kind=kind)
        spec = tf.TransformSpec(kind, "db4", model.level, "symmetric")
        core = []
        for c, x in enumerate((a, b)):
            evs, bands = ev.find_events(x, RATE, spec, (1, 2), 5.0, channel=c)
            core.extend(evs)
            assert [r["sigma"] for r in noise if r["channel"] == c] == [bb.sigma for bb in bands]
        assert found == sorted(core, key=lambda e: (e.start_s, e.channel))
    found, _ = model.events()
    assert sorted(e.channel for e in found) == [0, 0, 0, 1, 1]
    assert [e.start_s for e in found] == sorted(e.start_s for e in found)
    assert found == model.events(kind="swt")[0]          # SWT is the default
    # a higher k keeps only the stronger events, each no longer than before
    strong, _ = model.events(k=32.0)
    assert 0 < len(strong) < len(found) and all(e.score > 32 for e in strong)
    for e in strong:
        wide = [f for f in found if f.channel == e.channel and f.start_s <= e.start_s]
        assert wide and wide[-1].stop_s >= e.stop_s


@pytest.mark.parametrize("seed", range(6))
def test_detect_equals_a_plain_sweep_over_exceedance_extents(seed):
    # Cross-check of the vectorised merging against the definition written
    # out in plain Python: every exceedance is a closed sample range; ranges
    # that overlap or are next to each other form one event.
    rng = np.random.default_rng(seed)
    x = rng.normal(0, 1.0, 3000)
    spec = _spec(["swt", "dwt"][seed % 2], ["db4", "haar", "sym5"][seed % 3], x.size)
    bands = ev.prepare_signal(x, spec, (1, 2, 3))
    k = 2.2 + 0.2 * seed
    items = []
    for b in bands:
        for i, c in enumerate(b.coeffs):
            if abs(c) > k * b.sigma:
                g = b.index0 + i
                items.append((max(0, b.step * g + b.reach[0]),
                              min(x.size - 1, b.step * g + b.reach[1]),
                              abs(c) / b.sigma, b.level, b.centre0 + b.step * g))
    items.sort(key=lambda t: t[0])
    groups = []
    for it in items:
        if groups and it[0] <= groups[-1]["last"] + 1:
            groups[-1]["last"] = max(groups[-1]["last"], it[1])
            groups[-1]["members"].append(it)
        else:
            groups.append({"first": it[0], "last": it[1], "members": [it]})
    events = ev.detect(bands, x, 100.0, k, channel=2)
    assert len(events) == len(groups)
    for e, g in zip(events, groups):
        top = max(g["members"], key=lambda t: t[2])
        assert (e.start_s, e.stop_s) == (g["first"] / 100.0, g["last"] / 100.0)
        assert e.score == pytest.approx(top[2], rel=1e-12)
        assert e.peak == np.max(np.abs(x[g["first"]:g["last"] + 1]))
        if sum(1 for t in g["members"] if t[2] == top[2]) == 1:
            assert (e.level, e.peak_s) == (top[3], pytest.approx(top[4] / 100.0))


@pytest.mark.parametrize("case", ["noise", "zeros", "mostly zeros", "ties", "sorted", "spiky"])
def test_fast_noise_level_equals_the_plain_mad(case):
    # The bracketed median must give numpy.median's number exactly (the same
    # sigma the threshold edits use), whatever the values look like.
    from scalesieve.core.thresholds import MAD_TO_SIGMA, mad_sigma

    rng = np.random.default_rng(len(case))
    c = rng.normal(size=300_001)
    if case == "zeros":
        c[rng.random(c.size) < 0.3] = 0.0
    elif case == "mostly zeros":
        c[rng.random(c.size) < 0.9] = 0.0
    elif case == "ties":
        c = np.round(c * 2.0)
    elif case == "sorted":
        c = np.sort(c)
    elif case == "spiky":
        c = rng.standard_cauchy(c.size)
    # Reference: numpy.median over the non-zero |c| (Donoho & Johnstone 1994's MAD)
    for v in (c, c[:-1]):                                   # odd and even counts
        nz = np.abs(v[v != 0])
        assert mad_sigma(v) == float(np.median(nz) / MAD_TO_SIGMA)
        v32 = v.astype(np.float32)                          # the working precision kept
        nz32 = np.abs(v32[v32 != 0])
        assert mad_sigma(v32) == float(np.median(nz32) / MAD_TO_SIGMA)


def test_events_of_a_float32_model_equal_the_float64_command_line_path():
    # A model held in float32 (to halve memory) still gives the events the
    # command line computes from float64 samples of the same file.
    rng = np.random.default_rng(12)
    x = _bursts([0.1, 0.4, 0.7], RATE, 20_000, rng).astype(np.float32)
    rec = Recording(x[:, None], RATE, ["ch0"])
    for kind in ("dwt", "swt"):
        model = DecompositionModel(rec, tf.TransformSpec(kind, "db4"))
        found, _ = model.events(kind=kind)
        spec = tf.TransformSpec(kind, "db4", model.level, "symmetric")
        ref, _ = ev.find_events(x.astype(np.float64), RATE, spec)
        assert found == ref and len(found) == 3
