"""Reading a text table whose time column is ISO 8601, beside the same table in seconds.

Prints one JSON line: seconds for each and their ratio, measured side by side
in one run (not a test; run by hand: python tests/perf/bench_time_columns.py).
"""

from __future__ import annotations

import argparse
import json
import os
import tempfile
import time
from datetime import datetime, timedelta

import numpy as np

from scalesieve.io.readers import read_recording


def _write(path: str, rows: int, iso: bool) -> None:
    rng = np.random.RandomState(7)
    x = rng.standard_normal((rows, 2))
    t0 = datetime(2026, 3, 1, 8, 0, 0)
    with open(path, "w") as fh:
        fh.write(("timestamp" if iso else "time [s]") + ",a,b\n")
        for i in range(rows):
            t = (t0 + timedelta(milliseconds=i)).isoformat(sep=" ", timespec="milliseconds") \
                if iso else f"{i / 1000:.3f}"
            fh.write(f"{t},{x[i, 0]:.6f},{x[i, 1]:.6f}\n")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--rows", type=int, default=500_000)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as d:
        paths = {k: os.path.join(d, f"{k}.csv") for k in ("seconds", "iso")}
        for k, p in paths.items():
            _write(p, args.rows, k == "iso")
        best = {}
        for k, p in paths.items():
            times = []
            for _ in range(args.repeat):
                t = time.perf_counter()
                read_recording(p)
                times.append(time.perf_counter() - t)
            best[k] = min(times)
    print(json.dumps({"rows": args.rows, "seconds_column_s": round(best["seconds"], 3),
                      "iso_column_s": round(best["iso"], 3),
                      "iso_over_seconds": round(best["iso"] / best["seconds"], 2)}))


if __name__ == "__main__":
    main()
