"""Measurement formats and NumPy files: ``clean`` in blocks beside the whole-array clean.

Prints one JSON line: for each format, wall time and peak resident memory of
``scalesieve clean FILE -o OUT.wav --zero 1`` read whole and read in blocks
(measured side by side in this run), and their ratios.  Not a test: no
figure here is asserted anywhere.

    python tests/perf/bench_formats.py                    # 2^22 samples, one channel
    python tests/perf/bench_formats.py --samples 16777216 --only npy,hdf5 --fill-gaps
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
import warnings

import numpy as np

WHOLE = ("import sys; from scalesieve import memory_guard; memory_guard.STREAM_ABOVE = 1 << 62; "
         "from scalesieve.cli import main; sys.exit(main(sys.argv[1:]))")
BLOCKS = ("import sys; from scalesieve import memory_guard; memory_guard.STREAM_ABOVE = 0; "
          "from scalesieve.cli import main; sys.exit(main(sys.argv[1:]))")
RATE = 1000                       # whole seconds of EDF records


def _signal(n: int, gaps: bool) -> np.ndarray:
    """Invented pump vibration: a shaft line, noise, an impact every 0.1 s (and drop-outs)."""
    rng = np.random.default_rng(5)
    t = np.arange(n) / RATE
    x = 0.2 * np.sin(2 * np.pi * 24.5 * t) + 0.02 * rng.standard_normal(n)
    x[(np.arange(n) % (RATE // 10)) < 3] += 0.3
    if gaps:
        for a in range(1234, n, n // 50):
            x[a:a + 40] = np.nan
    return x


def _write(kind: str, path: str, x: np.ndarray) -> list[str]:
    """The file, written by the format's own library; the options its clean needs."""
    if kind == "npy":
        np.save(path, x)
        return ["--rate", str(RATE)]
    if kind == "npz":
        np.savez_compressed(path, accel=x, fs=np.float64(RATE))
        return []
    if kind == "hdf5":
        import h5py

        with h5py.File(path, "w") as f:
            f.create_dataset("vibration", data=x, chunks=(1 << 16,)).attrs["fs"] = float(RATE)
        return []
    if kind == "tdms":
        import nptdms

        with nptdms.TdmsWriter(path) as w:
            for a in range(0, x.shape[0], 1 << 20):
                w.write_segment([nptdms.ChannelObject("pump", "accel", x[a:a + (1 << 20)],
                                                      properties={"wf_increment": 1 / RATE})])
        return []
    if kind == "edf":
        import edfio

        m = x.shape[0] - x.shape[0] % RATE
        edfio.Edf([edfio.EdfSignal(x[:m], RATE, label="accel")]).write(path)
        return []
    if kind == "mdf":
        import asammdf

        m = asammdf.MDF(version="4.10")
        m.append([asammdf.Signal(x, np.arange(x.shape[0]) / RATE, name="accel")])
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            m.save(path, overwrite=True)
        m.close()
        return []
    raise SystemExit(f"unknown format {kind}")


def _run(cmd: list[str]) -> dict:
    """Wall time and peak resident memory of one process (ru_maxrss: KiB on Linux)."""
    t0 = time.perf_counter()
    p = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    _, status, usage = os.wait4(p.pid, 0)
    seconds = time.perf_counter() - t0
    err = p.stderr.read().decode(errors="replace")
    p.stderr.close()
    if os.waitstatus_to_exitcode(status) != 0:
        return {"failed": err.strip()[-300:]}
    return {"seconds": round(seconds, 3), "peak_mib": round(usage.ru_maxrss / 1024, 1)}


EXT = {"npy": ".npy", "npz": ".npz", "hdf5": ".h5", "tdms": ".tdms", "edf": ".edf",
       "mdf": ".mf4"}


def _make(kind: str, path: str, n: int, gaps: bool) -> list[str]:
    """The file written in a process of its own: a child's peak memory counts what its
    parent held when it started (Linux carries it over the fork), so this one holds
    nothing large; returns the options the clean needs."""
    code = ("import json, sys; sys.path.insert(0, sys.argv[1]); import bench_formats as b; "
            "print(json.dumps(b._write(sys.argv[2], sys.argv[3], "
            "b._signal(int(sys.argv[4]), sys.argv[5] == '1'))))")
    out = subprocess.run([sys.executable, "-c", code, os.path.dirname(os.path.abspath(__file__)),
                          kind, path, str(n), "1" if gaps else "0"], check=True,
                         capture_output=True, text=True).stdout
    return json.loads(out.strip().splitlines()[-1])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=1 << 22)
    ap.add_argument("--only", default=",".join(EXT))
    ap.add_argument("--fill-gaps", action="store_true",
                    help="drop-outs in the recording, filled by --fill-gaps linear")
    args = ap.parse_args()
    rows = {}
    with tempfile.TemporaryDirectory(prefix="scalesieve-bench-") as d:
        for kind in args.only.split(","):
            if kind == "edf" and args.fill_gaps:
                continue                               # EDF holds integers: no NaN
            path = os.path.join(d, "pump" + EXT[kind])
            opts = _make(kind, path, args.samples, args.fill_gaps)
            if args.fill_gaps:
                opts += ["--fill-gaps", "linear"]
            row = {"file_mib": round(os.path.getsize(path) / 2**20, 1)}
            for how, code in (("whole", WHOLE), ("blocks", BLOCKS)):
                out = os.path.join(d, f"out-{how}.wav")
                row[how] = _run([sys.executable, "-c", code, "clean", path, "-o", out,
                                 "--zero", "1", "--force", *opts])
            if "failed" not in row["whole"] and "failed" not in row["blocks"]:
                row["time_ratio"] = round(row["blocks"]["seconds"] / row["whole"]["seconds"], 2)
                row["memory_ratio"] = round(row["blocks"]["peak_mib"] / row["whole"]["peak_mib"],
                                            2)
            rows[kind] = row
            os.remove(path)
    print(json.dumps({"samples": args.samples, "fill_gaps": args.fill_gaps, "formats": rows}))


if __name__ == "__main__":
    main()
