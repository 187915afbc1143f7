"""Benchmark: `scalesieve clean` against a bare soundfile + PyWavelets script.

Prints one JSON line.  Both are run side by side, alternating, several
times; the figures are medians of wall time of whole processes.

    python tests/perf/bench_clean.py [--samples 10000000] [--repeat 3]
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time

import numpy as np
import soundfile as sf

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


def _time(cmd: list[str]) -> float:
    t0 = time.perf_counter()
    subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL)
    return time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--samples", type=int, default=10_000_000)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        rng = np.random.default_rng(0)
        n = args.samples
        t = np.arange(n) / 48000.0
        x = 0.3 * np.sin(2 * np.pi * 50 * t) + 0.05 * rng.standard_normal(n)
        src = os.path.join(tmp, "long.wav")
        sf.write(src, x.astype(np.float32), 48000, subtype="PCM_24")
        small = os.path.join(tmp, "small.wav")
        sf.write(small, x[:48000].astype(np.float32), 48000, subtype="PCM_16")
        bare = os.path.join(tmp, "bare.py")
        with open(bare, "w") as fh:
            fh.write(BARE)
        level = 12
        ours, ref, imp, cmd_small = [], [], [], []
        for i in range(args.repeat):
            ref.append(_time([sys.executable, bare, src, os.path.join(tmp, f"b{i}.wav"), str(level)]))
            ours.append(_time([sys.executable, "-m", "scalesieve", "clean", src, "-o",
                               os.path.join(tmp, f"o{i}.wav"), "--threshold", "universal",
                               "--wavelet", "db4", "--level", str(level), "--mode", "symmetric"]))
            imp.append(_time([sys.executable, "-c", IMPORTS]))
            cmd_small.append(_time([sys.executable, "-m", "scalesieve", "bands", small]))
        a, _ = sf.read(os.path.join(tmp, "o0.wav"))
        b, _ = sf.read(os.path.join(tmp, "b0.wav"))
        res = {
            "samples": n,
            "clean_s": statistics.median(ours), "bare_script_s": statistics.median(ref),
            "clean_ratio": statistics.median(ours) / statistics.median(ref),
            "clean_target": 1.15,
            "max_abs_diff_vs_bare": float(np.max(np.abs(a - b))),
            "small_command_s": statistics.median(cmd_small),
            "imports_s": statistics.median(imp),
            "small_command_ratio": statistics.median(cmd_small) / statistics.median(imp),
            "small_command_target": 1.6,
        }
        print(json.dumps(res))


if __name__ == "__main__":
    main()
