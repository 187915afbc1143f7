"""Benchmark: reading and writing big CSV tables, against bare numpy.

Prints one JSON line. Each pair runs side by side, alternating, several
times; the figures are medians of wall time in this process.

- read: ``read_recording`` on a logger-style table (semicolon, decimal comma,
  time in ms) against ``numpy.loadtxt`` on the same numbers written plainly
  (comma, '.'), which knows the dialect in advance and checks nothing;
- write: ``write_csv`` against ``numpy.savetxt`` with the same ``%.17g``.

    python tests/perf/bench_io.py [--rows 1000000] [--repeat 3]
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import tempfile
import time

import numpy as np

from scalesieve.io.readers import read_recording
from scalesieve.io.writers import write_csv


def _seconds(fn) -> float:
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--rows", type=int, default=1_000_000)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    n = args.rows
    rng = np.random.default_rng(0)
    x = rng.standard_normal((n, 3)) * 0.2
    table = np.column_stack([np.arange(n) * 0.5, x])  # time in ms, 2 kHz
    with tempfile.TemporaryDirectory() as tmp:
        plain = os.path.join(tmp, "plain.csv")
        logger = os.path.join(tmp, "logger.csv")
        np.savetxt(plain, table, fmt="%.9g", delimiter=",")
        with open(plain) as fh:
            body = fh.read()
        with open(logger, "w") as fh:
            fh.write("time [ms];strain_1;strain_2;strain_3\n")
            fh.write(body.replace(",", ";").replace(".", ","))

        ours_read, bare_read, ours_write, bare_write = [], [], [], []
        for i in range(args.repeat):
            ours_read.append(_seconds(lambda: read_recording(logger)))
            bare_read.append(_seconds(lambda: np.loadtxt(plain, delimiter=",")))
            out = os.path.join(tmp, f"w{i}.csv")
            ours_write.append(_seconds(lambda: write_csv(out, x, 2000.0, ["a", "b", "c"])))
            bare = os.path.join(tmp, f"b{i}.csv")
            bare_write.append(_seconds(lambda: np.savetxt(bare, table, fmt="%.17g",
                                                          delimiter=",")))
        result = {
            "rows": n, "columns": 4,
            "read_s": round(statistics.median(ours_read), 3),
            "loadtxt_s": round(statistics.median(bare_read), 3),
            "read_ratio": round(statistics.median(ours_read) / statistics.median(bare_read), 2),
            "write_s": round(statistics.median(ours_write), 3),
            "savetxt_s": round(statistics.median(bare_write), 3),
            "write_ratio": round(statistics.median(ours_write) / statistics.median(bare_write),
                                 2),
        }
    print(json.dumps(result))


if __name__ == "__main__":
    main()
