"""Bearing lines: one peak to one line, a tolerance of bins plus slip, peaks over the noise."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from scalesieve.core import bearing as br
from scalesieve.core import envelope as en

SAMPLES = Path(__file__).resolve().parents[2] / "sample_signals"


def _fan_report():
    x, rate = sf.read(SAMPLES / "fan_bearing.wav", dtype="float64", always_2d=True)
    g = br.parse_geometry("10,8.0,42.0,0")
    return en.report(x[:, 0], rate, "best", geometry=g, shaft_hz=29.5)


def test_fan_demo_names_the_outer_race_only():
    # sample_signals/README.md: the invented fan has an outer-race defect, impacts
    # at BPFO 119.405 Hz (Randall & Antoni 2011, eq. 2 with its geometry); nothing
    # repeats at BPFI, so no BPFI line may be matched
    rep = _fan_report()
    bpfi = [r for r in rep["lines"] if r["name"] == "bpfi"]
    assert bpfi and all(r["found_hz"] is None for r in bpfi), bpfi
    bpfo = sorted((r for r in rep["lines"] if r["name"] == "bpfo" and not r["sideband"]),
                  key=lambda r: r["harmonic"])
    for r in bpfo:
        assert r["found_hz"] == pytest.approx(119.405 * r["harmonic"], abs=0.5)


def test_one_peak_goes_to_the_nearest_line_only():
    # two lines 1 Hz apart both reach one peak: the nearer keeps it, the other is
    # left unmatched and flagged (a flat floor, one peak far above it)
    f = np.arange(0, 200, 0.25)
    a = np.full_like(f, 1e-3)
    a[np.argmin(np.abs(f - 100.5))] = 0.05
    marked = [{"name": "bpfo", "harmonic": 1, "sideband": 0, "hz": 100.0},
              {"name": "bpfi", "harmonic": 1, "sideband": 0, "hz": 101.2}]
    rows = br.match(marked, f, a)
    assert rows[0]["found_hz"] == 100.5 and not rows[0]["ambiguous"]
    assert rows[1]["found_hz"] is None and rows[1]["ambiguous"]


def test_tolerance_is_bins_plus_slip():
    # 3 bins of 0.25 Hz plus 1 % of 200 Hz (slip, Randall & Antoni 2011: 1-2 %)
    assert br.tolerance_hz(200.0, 0.25) == pytest.approx(0.75 + 2.0)


def test_noise_ratio_is_the_rayleigh_false_alarm_level():
    # reference: scipy.stats.rayleigh; the largest of K independent bins passes
    # the level with probability 1 - (1 - p_1)^K, about the false-alarm share
    from scipy import stats

    k, p = 50, 0.01
    level = br.noise_ratio(k, p) * stats.rayleigh.median()
    p_one = stats.rayleigh.sf(level)
    assert 1 - (1 - p_one) ** k == pytest.approx(p, rel=0.01)


def test_noise_peaks_are_not_matched():
    # envelope spectrum of a band of Gaussian noise: no line stands out of it
    rng = np.random.default_rng(2)
    rate = 2000.0
    x = rng.standard_normal(1 << 15)
    freqs, amp = en.spectrum(en.envelope(x), rate)
    marked = br.lines({"ftf_hz": 9.0, "bpfo_hz": 90.0, "bpfi_hz": 150.0, "bsf_hz": 60.0}, 20.0)
    found = [r for r in br.match(marked, freqs, amp) if r["found_hz"] is not None]
    # 21 lines at a 1 % false-alarm share each: at most one by chance (common practice)
    assert len(found) <= 1, found
