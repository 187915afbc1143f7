"""Benchmark: event detection against the forward transform alone.

Prints one JSON line.  On one invented recording (default 10 million
samples at 48 kHz: hiss, a mains tone and a train of impacts) it times, side
by side and alternating, median of ``--repeat`` runs each:

* ``forward_used``: the transform detection needs (levels 1..max(levels) of
  the SWT, the default for events; ``core.events.detail_bands``);
* ``forward_full``: ``transforms.forward`` at the default depth, what a
  model builds (the SWT's full depth holds depth+1 copies of the signal);
* ``detect_total``: ``core.events.find_events`` - transform of the used
  levels, noise, exceedances, merging, peaks - the whole job;
* ``detect_only``: ``prepare`` + ``detect`` on coefficients already there
  (what a new k or a new list of levels costs in the window);
* ``repetition``: the train analysis on the events found.

``ratio_total_to_forward_used`` is the figure the target "within 2x the
forward transform alone" is measured by.  A second row uses pure noise at
k = 3, which gives many thousands of events (a stress case for merging).

    python tests/perf/bench_events.py [--samples 10000000] [--repeat 3] [--kind swt]
"""

from __future__ import annotations

import argparse
import json
import statistics
import time

import numpy as np

from scalesieve.core import events as ev
from scalesieve.core import transforms as tf


def _recording(n: int, rate: float, impacts: bool) -> np.ndarray:
    rng = np.random.default_rng(0)
    x = rng.normal(0.0, 0.01, n)
    if not impacts:
        return x
    t = np.arange(n) / rate
    x += 0.2 * np.sin(2 * np.pi * 50.0 * t)
    period = 1.0 / 87.3
    for tk in np.arange(0.01, n / rate - 0.02, period):
        i0 = int(np.ceil(tk * rate))
        seg = t[i0:i0 + 480] - tk  # 10 ms of ringing in d2 (6-12 kHz at 48 kHz)
        x[i0:i0 + seg.size] += 0.07 * np.exp(-seg / 0.001) * np.sin(2 * np.pi * 8000.0 * seg)
    return x


def _median_time(fn, repeat: int) -> tuple[float, object]:
    times, out = [], None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times), out


def _row(x: np.ndarray, rate: float, kind: str, k: float, levels, repeat: int) -> dict:
    spec = tf.TransformSpec(kind=kind).resolved(x.shape[0])
    # Alternate the contenders so that load from other work hits all alike.
    fu, ft, do = [], [], []
    fl: list[float] = []
    found = None
    for _ in range(repeat):
        t, bands = _median_time(lambda: ev.detail_bands(x, spec, levels), 1)
        fu.append(t)
        t, (found, _) = _median_time(lambda: ev.find_events(x, rate, spec, levels, k), 1)
        ft.append(t)
        t, _ = _median_time(lambda: ev.detect(ev.prepare(bands, spec, x.shape[0]), x, rate, k),
                            1)
        do.append(t)
        del bands
    for _ in range(max(1, repeat // 2)):
        t, full = _median_time(lambda: tf.forward(x, spec), 1)
        fl.append(t)
        del full
    rep_t, rep = _median_time(lambda: ev.repetition([e.start_s for e in found]), repeat)
    used, total, only, full_t = (statistics.median(v) for v in (fu, ft, do, fl))
    return {
        "samples": int(x.shape[0]), "kind": kind, "wavelet": spec.wavelet,
        "depth": int(spec.level), "levels": list(levels), "k": k, "events": len(found),
        "forward_used_s": round(used, 4), "forward_full_s": round(full_t, 4),
        "detect_total_s": round(total, 4), "detect_only_s": round(only, 4),
        "repetition_s": round(rep_t, 4),
        "ratio_total_to_forward_used": round(total / used, 3),
        "ratio_total_to_forward_full": round(total / full_t, 3),
        "ratio_detect_only_to_forward_used": round(only / used, 3),
        "rate_hz": None if rep is None else round(rep.rate_hz, 4),
    }


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--samples", type=int, default=10_000_000)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--kind", choices=("swt", "dwt"), default=ev.DEFAULT_KIND)
    args = ap.parse_args()
    rate = 48000.0
    rows = []
    x = _recording(args.samples, rate, impacts=True)
    rows.append({"case": "impact train", **_row(x, rate, args.kind, 5.0, (1, 2), args.repeat)})
    x = _recording(args.samples, rate, impacts=False)
    rows.append({"case": "noise, k=3", **_row(x, rate, args.kind, 3.0, (1, 2), args.repeat)})
    print(json.dumps({"benchmark": "events", "target": "detect_total <= 2 x forward_used",
                      "rows": rows}))


if __name__ == "__main__":
    main()
