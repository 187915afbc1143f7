"""Benchmark: the decomposition model on long recordings, against the floors.

Prints one JSON line (``--json``) or a short table.  Every figure comes from
running the real model on an invented pump-bearing accelerometer trace
(48 kHz: shaft tone, bearing impacts, noise, slow drift), each part in a
fresh process, alternated over several rounds; figures are medians.

    python tests/perf/bench_model.py --json
    python tests/perf/bench_model.py --json --samples 10000000 --rounds 3 --repeat 7
    python tests/perf/bench_model.py --json --no-load      # skip the 100 M WAV loading part
    python tests/perf/bench_model.py --json --large 100000000   # also edits on 100 M samples

What is measured (seconds unless named otherwise):

- ``memory_pass_s``: one ``np.add(x, 1.0, out=y)`` over the signal (y
  already allocated): the floor for anything that rewrites the signal.
- ``naive_recompute_s``: ``pywt.wavedec`` + ``pywt.waverec`` of the whole
  signal (db4, symmetric, the model's level).
- ``gain_edit_s``: a user drags the approximation's gain slider: the gain
  edit is replaced by a new value, until the cleaned signal is updated.
  ``gain_edit_first_s``: the first gain edit on that band (its component is
  synthesised and cached then).
- ``region_edit_s``: a 50 ms region muting levels 1-3 (a click) is moved
  along the recording; ``region_edit_small_s`` the same on a 1 M signal;
  ``region_edit_first_s`` adding it; ``region_edit_thresholded_s`` moving it
  with a threshold over all details later in the recipe.
- ``threshold_edit_s``: the scale of a universal soft threshold over all
  detail levels is changed; ``threshold_edit_first_s`` adding it (the noise
  estimate is made then).
- ``peak_rss_bytes``: the largest resident set of the process that holds the
  model and makes those edits (``resource.getrusage``; nothing subtracted:
  the interpreter, NumPy and PyWavelets are in it); ``signal_bytes``: the
  float64 bytes of the signal.
- ``incremental_max_abs_err``: after the edits, the live model against a
  fresh model of the same recipe (both float64).
- loading (unless ``--no-load``): a 100 M-sample float32 WAV through
  ``scalesieve.api.load`` + ``DecompositionModel`` with a progress callable
  (float64, the default, and float32 samples), against ``soundfile.read``
  of the same file (its default float64; float32 told too) and a bare
  ``soundfile.read`` + ``pywt.wavedec``, each in a fresh process.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from dataclasses import replace

import numpy as np

RATE = 48000.0
HERE = os.path.abspath(__file__)


# ----------------------------------------------------------------- the signal

def make_signal(n: int, seed: int = 7) -> np.ndarray:
    """An invented bearing trace, made block by block (no full-size temporaries)."""
    rng = np.random.default_rng(seed)
    x = np.empty(n)
    block = 1 << 16
    period = int(RATE * 0.0071)           # an impact every 7.1 ms
    ring = np.exp(-np.arange(96) / 12.0) * np.sin(2 * np.pi * 3500.0 * np.arange(96) / RATE)
    for i in range(0, n, block):
        j = min(i + block, n)
        t = np.arange(i, j) / RATE
        seg = 0.3 * np.sin(2 * np.pi * 24.7 * t) + 0.02 * np.sin(2 * np.pi * 0.05 * t)
        seg += 0.05 * rng.standard_normal(j - i)
        first = -(-i // period) * period
        for k in range(first, j, period):
            m = min(96, j - k)
            seg[k - i:k - i + m] += 0.4 * ring[:m]
        x[i:j] = seg
    return x


def _median_time(fn, repeat: int) -> list[float]:
    out = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        out.append(time.perf_counter() - t0)
    return out


def _peak_rss() -> int:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


# -------------------------------------------------------------------- workers

def worker_model(n: int, repeat: int) -> dict:
    """Hold one model of n samples and make the edits a user makes."""
    from scalesieve.core.recording import Recording
    from scalesieve.core.transforms import TransformSpec
    from scalesieve.model import DecompositionModel
    from scalesieve.recipe import Edit

    x = make_signal(n)
    rec = Recording(x[:, None], RATE, ["accel"])
    spec = TransformSpec("dwt", "db4", None, "symmetric")
    t0 = time.perf_counter()
    model = DecompositionModel(rec, spec)
    build = time.perf_counter() - t0
    res: dict = {"n": n, "level": model.level, "build_s": [build]}

    gain = Edit("gain", levels=("a",), gain=0.9)
    res["gain_edit_first_s"] = _median_time(lambda: model.add_edit(gain), 1)
    values = iter(np.linspace(0.85, 0.1, 1000))
    res["gain_edit_s"] = _median_time(
        lambda: model.replace_edit(0, replace(gain, gain=float(next(values)))), repeat)

    dur = n / RATE
    region = Edit("region", levels=(1, 2, 3), start_s=0.25 * dur, stop_s=0.25 * dur + 0.05,
                  gain=0.0)
    res["region_edit_first_s"] = _median_time(lambda: model.add_edit(region), 1)
    starts = iter(0.25 * dur + 0.0071 * np.arange(1, 1000))   # 7.1 ms steps, 7 s at most

    def move(index):
        t = float(next(starts))
        model.replace_edit(index, replace(region, start_s=t, stop_s=t + 0.05))

    # sub-millisecond: many moves, so that the median is not the machine's noise
    res["region_edit_s"] = _median_time(lambda: move(1), repeat * 15)

    thr = Edit("threshold", levels="details", rule="universal", shape="soft", noise="finest")
    res["threshold_edit_first_s"] = _median_time(lambda: model.add_edit(thr), 1)
    scales = iter(np.linspace(0.8, 1.2, 1000))
    res["threshold_edit_s"] = _median_time(
        lambda: model.replace_edit(2, replace(thr, scale=float(next(scales)))), repeat)
    res["region_edit_thresholded_s"] = _median_time(lambda: move(1), repeat * 15)
    res["peak_rss_bytes"] = _peak_rss()
    res["signal_bytes"] = int(x.nbytes)

    # Honesty check, after the peak was read: the live model against a fresh one.
    live = model.cleaned(0).copy()
    recipe = model.edits
    del model
    fresh = DecompositionModel(rec, spec, recipe)
    res["incremental_max_abs_err"] = float(np.max(np.abs(live - fresh.cleaned(0))))
    return res


def worker_baseline(n: int, repeat: int) -> dict:
    """The floors: one pass over memory, and a full PyWavelets recompute."""
    import pywt

    from scalesieve.core.transforms import default_level

    x = make_signal(n)
    y = np.empty_like(x)
    np.add(x, 1.0, out=y)                 # touch y once: page faults are not the pass
    level = default_level(n, "db4")

    def naive():
        c = pywt.wavedec(x, "db4", mode="symmetric", level=level)
        pywt.waverec(c, "db4", mode="symmetric")

    return {"memory_pass_s": _median_time(lambda: np.add(x, 1.0, out=y), repeat * 3),
            "naive_recompute_s": _median_time(naive, repeat)}


def worker_load(path: str, how: str) -> dict:
    """Read (soundfile alone) or load and decompose (Scalesieve) one WAV."""
    if how.startswith("soundfile"):
        import pywt
        import soundfile as sf

        from scalesieve.core.transforms import default_level

        dtype = "float32" if how.endswith("float32") else "float64"
        t0 = time.perf_counter()
        data, _ = sf.read(path, dtype=dtype)
        read = time.perf_counter() - t0
        # what a bare script adds to decompose it: the floor of "loads and decomposes"
        pywt.wavedec(data, "db4", mode="symmetric", level=default_level(data.shape[0], "db4"))
        return {"seconds": read, "samples": int(data.shape[0]),
                "with_wavedec_s": time.perf_counter() - t0}
    from scalesieve import api
    from scalesieve.io import readers  # noqa: F401  imports are not the load

    calls = []
    last = [time.perf_counter()]
    gaps = []

    def progress(fraction, text):
        now = time.perf_counter()
        gaps.append(now - last[0])
        last[0] = now
        calls.append(fraction)

    dtype = np.float32 if how.endswith("float32") else np.float64
    t0 = time.perf_counter()
    rec = api.load(path, dtype=dtype)
    t_read = time.perf_counter() - t0
    last[0] = time.perf_counter()
    model = api.build_model(rec, progress=progress)
    total = time.perf_counter() - t0
    return {"seconds": total, "read_s": t_read, "samples": model.recording.n,
            "progress_calls": len(calls), "longest_progress_gap_s": max(gaps) if gaps else None,
            "peak_rss_bytes": _peak_rss()}


def _run_worker(args: list[str]) -> dict:
    out = subprocess.run([sys.executable, HERE, "--worker", *args], check=True,
                         capture_output=True, text=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def _write_wav(path: str, n: int) -> None:
    import soundfile as sf

    with sf.SoundFile(path, "w", int(RATE), 1, subtype="FLOAT") as f:
        block = 1 << 22
        for i in range(0, n, block):
            f.write(make_signal(min(block, n - i), seed=i).astype(np.float32))


# ----------------------------------------------------------------------- main

def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--json", action="store_true", help="print one JSON line")
    ap.add_argument("--samples", type=int, default=10_000_000)
    ap.add_argument("--small", type=int, default=1_000_000)
    ap.add_argument("--repeat", type=int, default=7)
    ap.add_argument("--rounds", type=int, default=3)
    ap.add_argument("--load-samples", type=int, default=100_000_000)
    ap.add_argument("--no-load", action="store_true")
    ap.add_argument("--large", type=int, default=0, metavar="N",
                    help="also hold a model of N samples (e.g. 100000000) once and time "
                         "its edits: the edit costs should not grow with the length")
    ap.add_argument("--worker", nargs="+", help=argparse.SUPPRESS)
    args = ap.parse_args()

    if args.worker:
        kind, *rest = args.worker
        if kind == "model":
            res = worker_model(int(rest[0]), int(rest[1]))
        elif kind == "baseline":
            res = worker_baseline(int(rest[0]), int(rest[1]))
        else:
            res = worker_load(rest[0], rest[1])
        print(json.dumps(res))
        return

    runs: dict = {}

    def add(prefix: str, res: dict) -> None:
        for k, v in res.items():
            runs.setdefault(prefix + k, []).extend(v if isinstance(v, list) else [v])

    for _ in range(args.rounds):
        add("", _run_worker(["model", str(args.samples), str(args.repeat)]))
        add("small_", _run_worker(["model", str(args.small), str(args.repeat)]))
        add("", _run_worker(["baseline", str(args.samples), str(args.repeat)]))

    if args.large:
        add("large_", _run_worker(["model", str(args.large), str(args.repeat)]))

    med = {k: statistics.median(v) for k, v in runs.items()}
    res = {
        "n": args.samples, "level": int(med["level"]),
        "memory_pass_s": med["memory_pass_s"],
        "naive_recompute_s": med["naive_recompute_s"],
        "build_s": med["build_s"],
        "gain_edit_s": med["gain_edit_s"],
        "gain_edit_first_s": med["gain_edit_first_s"],
        "region_edit_s": med["region_edit_s"],
        "region_edit_small_s": med["small_region_edit_s"],
        "region_edit_first_s": med["region_edit_first_s"],
        "region_edit_thresholded_s": med["region_edit_thresholded_s"],
        "threshold_edit_s": med["threshold_edit_s"],
        "threshold_edit_first_s": med["threshold_edit_first_s"],
        "peak_rss_bytes": int(max(runs["peak_rss_bytes"])),
        "signal_bytes": int(med["signal_bytes"]),
        "incremental_max_abs_err": max(runs["incremental_max_abs_err"]),
    }
    if args.large:
        res.update({f"large_{k}": med[f"large_{k}"] for k in (
            "n", "build_s", "gain_edit_s", "gain_edit_first_s", "region_edit_s",
            "region_edit_first_s", "region_edit_thresholded_s", "threshold_edit_s",
            "threshold_edit_first_s")})
        res["large_peak_rss_bytes"] = int(max(runs["large_peak_rss_bytes"]))
        res["large_signal_bytes"] = int(med["large_signal_bytes"])
        res["large_incremental_max_abs_err"] = max(runs["large_incremental_max_abs_err"])
    ratios = {
        "gain_vs_naive": res["gain_edit_s"] / res["naive_recompute_s"],
        "gain_vs_memory_pass": res["gain_edit_s"] / res["memory_pass_s"],
        "region_vs_small": res["region_edit_s"] / res["region_edit_small_s"],
        "threshold_vs_naive": res["threshold_edit_s"] / res["naive_recompute_s"],
        "peak_rss_vs_signal": res["peak_rss_bytes"] / res["signal_bytes"],
    }
    targets = {"gain_vs_naive": 0.25, "gain_vs_memory_pass": 3.0, "region_vs_small": 1.5,
               "threshold_vs_naive": 1.3, "peak_rss_vs_signal": 6.0}

    if not args.no_load:
        with tempfile.TemporaryDirectory() as tmp:
            path = os.path.join(tmp, "long_float32.wav")
            _write_wav(path, args.load_samples)
            load: dict = {}
            for _ in range(args.rounds):
                for how in ("soundfile", "scalesieve", "soundfile_float32",
                            "scalesieve_float32"):
                    r = _run_worker(["load", path, how])
                    for k, v in r.items():
                        load.setdefault(f"{how}_{k}", []).append(v)
        lm = {k: statistics.median(v) for k, v in load.items() if None not in v}
        res.update({
            "load_n": args.load_samples,
            "soundfile_read_s": lm["soundfile_seconds"],
            "load_s": lm["scalesieve_seconds"],
            "load_read_s": lm["scalesieve_read_s"],
            "soundfile_read_float32_s": lm["soundfile_float32_seconds"],
            "load_float32_s": lm["scalesieve_float32_seconds"],
            "load_progress_calls": int(lm["scalesieve_progress_calls"]),
            "load_longest_progress_gap_s": max(load["scalesieve_longest_progress_gap_s"]),
            "bare_read_wavedec_s": lm["soundfile_with_wavedec_s"],
            "bare_read_wavedec_float32_s": lm["soundfile_float32_with_wavedec_s"],
            "load_peak_rss_bytes": int(max(load["scalesieve_peak_rss_bytes"])),
            "load_float32_peak_rss_bytes": int(max(load["scalesieve_float32_peak_rss_bytes"])),
        })
        # soundfile alone: soundfile.read(path) as it reads by default (float64)
        ratios["load_vs_soundfile"] = res["load_s"] / res["soundfile_read_s"]
        ratios["load_float32_vs_soundfile"] = res["load_float32_s"] / res["soundfile_read_s"]
        targets["load_vs_soundfile"] = 4.0
        targets["load_float32_vs_soundfile"] = 4.0
        # told, not targets: against a float32 read, and against a bare read + wavedec
        res["load_float32_vs_soundfile_float32"] = (res["load_float32_s"]
                                                    / res["soundfile_read_float32_s"])
        res["load_vs_bare_read_wavedec"] = res["load_s"] / res["bare_read_wavedec_s"]
        res["load_float32_vs_bare_read_wavedec_float32"] = (
            res["load_float32_s"] / res["bare_read_wavedec_float32_s"])

    res["ratios"] = ratios
    res["targets"] = targets
    res["all_targets_met"] = all(ratios[k] <= targets[k] for k in targets)
    res["rounds"] = args.rounds
    res["repeat"] = args.repeat
    if args.json:
        print(json.dumps(res))
        return
    for k, v in res.items():
        if not isinstance(v, dict):
            print(f"{k:>32}: {v}")
    for k, v in ratios.items():
        mark = "ok" if v <= targets[k] else "MISSED"
        print(f"{k:>32}: {v:.3f} (target <= {targets[k]}) {mark}")


if __name__ == "__main__":
    main()
