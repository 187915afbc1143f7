"""Benchmark: `scalesieve clean --recipe` against a bare soundfile + PyWavelets script.

For each WAV sample format (32- and 64-bit float, 16- and 24-bit PCM) the two
run side by side, alternating (one pair after the other), ``--repeat`` times;
each figure is the median wall time of whole processes, and the ratio is
ours over the bare script's, per format.  Also a small command against
importing numpy, pywt and soundfile.  Prints one JSON line.

Both run as an installed program does: byte-compiled (the children get their
own ``PYTHONPYCACHEPREFIX``, even where ``PYTHONDONTWRITEBYTECODE`` is set,
which would otherwise make every run compile the package's sources again)
and after one untimed run of each, so neither pays a cold file cache.

    python tests/perf/bench_clean.py [--samples 10000000] [--repeat 9]
                                     [--formats FLOAT,DOUBLE,PCM_16,PCM_24]
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

import numpy as np
import soundfile as sf

#: what the recipe below does, written with the libraries alone
BARE = r"""
import sys, numpy as np, pywt, soundfile as sf
x, rate = sf.read(sys.argv[1], dtype="float64", always_2d=True)
info = sf.info(sys.argv[1])
out = np.empty_like(x)
for k in range(x.shape[1]):
    c = pywt.wavedec(x[:, k], "db4", mode="symmetric", level=int(sys.argv[3]))
    d1 = c[-1]
    sigma = np.median(np.abs(d1[d1 != 0])) / 0.6744897501960817
    lam = sigma * np.sqrt(2 * np.log(x.shape[0]))
    c = [c[0]] + [pywt.threshold(d, lam, mode="soft") for d in c[1:]]
    out[:, k] = pywt.waverec(c, "db4", mode="symmetric")[: x.shape[0]]
sf.write(sys.argv[2], out, rate, subtype=info.subtype)
"""

IMPORTS = "import numpy, pywt, soundfile"
LEVEL = 8
TARGET = 1.10


ENV = dict(os.environ)


def _time(cmd: list[str], cpu: list | None = None) -> float:
    """Wall time of a whole process; its CPU time (user + system) appended to ``cpu``."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL, env=ENV)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if cpu is not None:
        cpu.append(after.ru_utime - before.ru_utime + after.ru_stime - before.ru_stime)
    return wall


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--samples", type=int, default=10_000_000)
    ap.add_argument("--repeat", type=int, default=9)
    ap.add_argument("--formats", default="FLOAT,DOUBLE,PCM_16,PCM_24")
    args = ap.parse_args()
    res: dict = {"samples": args.samples, "repeat": args.repeat, "level": LEVEL,
                 "target": TARGET, "formats": {}}
    with tempfile.TemporaryDirectory() as tmp:
        ENV.pop("PYTHONDONTWRITEBYTECODE", None)
        ENV["PYTHONPYCACHEPREFIX"] = os.path.join(tmp, "pycache")
        rng = np.random.default_rng(0)
        n = args.samples
        t = np.arange(n) / 48000.0
        x = 0.3 * np.sin(2 * np.pi * 50 * t) + 0.05 * rng.standard_normal(n)
        recipe = os.path.join(tmp, "universal.json")
        with open(recipe, "w") as fh:
            json.dump({"scalesieve_recipe": 1,
                       "transform": {"kind": "dwt", "wavelet": "db4", "level": LEVEL,
                                     "mode": "symmetric"},
                       "edits": [{"op": "threshold", "levels": "details", "rule": "universal",
                                  "shape": "soft", "noise": "finest"}]}, fh)
        bare = os.path.join(tmp, "bare.py")
        with open(bare, "w") as fh:
            fh.write(BARE)
        for subtype in args.formats.split(","):
            src = os.path.join(tmp, f"long_{subtype}.wav")
            sf.write(src, x, 48000, subtype=subtype)
            ours, ref, ours_cpu, ref_cpu = [], [], [], []
            for i in range(-1, args.repeat):
                out_b = os.path.join(tmp, f"b_{subtype}.wav")
                out_o = os.path.join(tmp, f"o_{subtype}.wav")
                # alternate which goes first, so neither always finds a warm cache
                pair = [(ref, ref_cpu, [sys.executable, bare, src, out_b, str(LEVEL)]),
                        (ours, ours_cpu, [sys.executable, "-m", "scalesieve", "clean", src,
                                          "-o", out_o, "--recipe", recipe, "--force"])]
                for times, cpu, cmd in (pair if i % 2 == 0 else pair[::-1]):
                    if i < 0:
                        _time(cmd)               # untimed: byte-compile, warm the cache
                    else:
                        times.append(_time(cmd, cpu))
            a, _ = sf.read(out_o)
            b, _ = sf.read(out_b)
            ratios = [o / r for o, r in zip(ours, ref)]
            res["formats"][subtype] = {
                "clean_s": statistics.median(ours), "bare_script_s": statistics.median(ref),
                "ratio": statistics.median(ours) / statistics.median(ref),
                "paired_ratio_median": statistics.median(ratios),
                "paired_ratio_range": [min(ratios), max(ratios)],
                # CPU time is less moved by other work on the machine than wall time
                "cpu_ratio": statistics.median(ours_cpu) / statistics.median(ref_cpu),
                "max_abs_diff_vs_bare": float(np.max(np.abs(a - b))),
            }
            os.remove(src)
        small = os.path.join(tmp, "small.wav")
        sf.write(small, x[:48000].astype(np.float32), 48000, subtype="PCM_16")
        imp, cmd_small = [], []
        _time([sys.executable, "-m", "scalesieve", "bands", small])
        for _ in range(args.repeat):
            imp.append(_time([sys.executable, "-c", IMPORTS]))
            cmd_small.append(_time([sys.executable, "-m", "scalesieve", "bands", small]))
        res.update({
            "small_command_s": statistics.median(cmd_small),
            "imports_s": statistics.median(imp),
            "small_command_ratio": statistics.median(cmd_small) / statistics.median(imp),
            "small_command_target": 1.6,
            "load_average": os.getloadavg()[0],
        })
    print(json.dumps(res))


if __name__ == "__main__":
    main()
