"""Benchmark: the largest allowed recipe, 10 000 threshold edits, against 1 000.

The cost of a recipe must grow linearly in its edits: the ratio
``seconds_10000 / seconds_1000`` should stay within 12 (10 x the edits plus
slack).  Each size runs in a fresh process (peak memory is its own); figures
are medians over ``--rounds``, sizes alternated.  Prints one JSON line.

    python tests/perf/bench_huge_recipe.py
    python tests/perf/bench_huge_recipe.py --samples 1000000 --edits 1000 10000 --rounds 1

What is measured: building a ``DecompositionModel`` (DWT db4, the default
level) of an invented pump-bearing trace with N universal soft threshold
edits over all detail levels, and then changing the last edit's scale (the
update a user makes at the end of a long recipe); ``peak_rss_bytes`` is that
process's largest resident set.  ``edit_hashes`` counts ``Edit.__hash__``
calls during the build (the quadratic cost this benchmark was made for).
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import statistics
import subprocess
import sys
import time
from dataclasses import replace

HERE = os.path.abspath(__file__)


def _one(samples: int, edits: int) -> dict:
    import numpy as np

    from scalesieve.core.recording import Recording
    from scalesieve.core.transforms import TransformSpec
    from scalesieve.model import DecompositionModel
    from scalesieve.recipe import Edit

    rng = np.random.default_rng(7)
    t = np.arange(samples) / 48000.0
    x = 0.3 * np.sin(2 * np.pi * 29.5 * t) + 0.02 * rng.standard_normal(samples)
    x[::4800] += 0.8                          # impacts every 0.1 s
    rec = Recording(x[:, None], 48000.0, ["accel"], source="")
    chain = tuple(Edit("threshold", levels="details", rule="universal", shape="soft",
                       scale=1.0 + 1e-4 * k) for k in range(edits))
    calls = [0]
    real_hash = Edit.__hash__

    def counting(self):
        calls[0] += 1
        return real_hash(self)

    Edit.__hash__ = counting
    t0 = time.perf_counter()
    model = DecompositionModel(rec, TransformSpec("dwt", "db4", None, "symmetric"), chain)
    build = time.perf_counter() - t0
    Edit.__hash__ = real_hash
    hashes = calls[0]
    t0 = time.perf_counter()
    model.replace_edit(edits - 1, replace(chain[-1], scale=1.5))
    model.settle()
    last = time.perf_counter() - t0
    return {"build_s": build, "last_edit_s": last, "edit_hashes": hashes,
            "peak_rss_bytes": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=1_000_000)
    ap.add_argument("--edits", type=int, nargs="+", default=[1000, 10000])
    ap.add_argument("--rounds", type=int, default=1)
    ap.add_argument("--child", nargs=2, type=int, help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:
        print(json.dumps(_one(*args.child)))
        return 0
    runs: dict[int, list[dict]] = {n: [] for n in args.edits}
    for _ in range(args.rounds):
        for n in args.edits:
            out = subprocess.run([sys.executable, HERE, "--child", str(args.samples), str(n)],
                                 capture_output=True, text=True, check=True)
            runs[n].append(json.loads(out.stdout.strip().splitlines()[-1]))
    fig: dict = {"samples": args.samples}
    for n, rs in runs.items():
        for k in ("build_s", "last_edit_s", "edit_hashes", "peak_rss_bytes"):
            fig[f"{k}_{n}"] = statistics.median(r[k] for r in rs)
    lo, hi = min(args.edits), max(args.edits)
    if lo != hi:
        fig["build_ratio"] = fig[f"build_s_{hi}"] / fig[f"build_s_{lo}"]
        fig["edits_ratio"] = hi / lo
    print(json.dumps(fig))
    return 0


if __name__ == "__main__":
    sys.exit(main())
