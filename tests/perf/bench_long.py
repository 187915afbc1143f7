"""Benchmark: long recordings in bounded memory (clean, bands, events).

Writes a float32 mono WAV of ``--samples`` (default 2**28) and one a quarter
as long, then runs, on each, `scalesieve clean --threshold universal`,
`scalesieve bands --json` and `scalesieve events --json` (SWT, levels 1,2)
and the bare whole-array PyWavelets script doing the same clean (read,
wavedec, VisuShrink, waverec, write).  Each is a whole process, timed by
wall clock, its peak resident memory read from ``wait4``.  Prints one JSON
line: the figures and the ratios the budgets are about, measured side by
side in this run (clean / bare time, long / short time and memory).

    python tests/perf/bench_long.py --samples 4194304      # small, a minute
    python tests/perf/bench_long.py --samples 16777216 --only clean_swt,bands_swt --force-blocks
    python tests/perf/bench_long.py                        # 2**28: needs ~9 GiB free for the
                                                           # bare script, ~2 GiB of disk
    python tests/perf/bench_long.py --samples 16000000 --table --only clean,clean_whole,bands,events
                                                           # logger CSVs instead of WAVs
    python tests/perf/bench_long.py --samples 16777216 --no-bare \
        --only bands_packet,bands_packet_whole,bands_packet_best,bands_packet_best_whole,clean_packet,clean_packet_whole
                                                           # packets: blocks vs whole array

``--table`` writes the recordings as a logger's CSV instead (``time [ms]``,
semicolon, decimal comma); the bare script then reads it with
``numpy.loadtxt``, and ``clean_whole`` / ``bands_whole`` run the command with
the whole-file reader (the budget lifted) beside it.

The full size is for a quiet machine: the bare script alone holds about
8 GiB.  ``--no-bare`` leaves it out.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time

import numpy as np
import soundfile as sf

BARE = r"""
import sys, numpy as np, pywt, soundfile as sf
x, rate = sf.read(sys.argv[1], dtype="float64")
level = pywt.dwt_max_level(x.shape[0], 8) - 2
level = max(1, min(level, 12))
c = pywt.wavedec(x, "db4", mode="symmetric", level=level)
d1 = np.abs(c[-1])
sigma = np.median(d1[d1 != 0]) / 0.6744897501960817
lam = sigma * np.sqrt(2 * np.log(x.shape[0]))
c = [c[0]] + [pywt.threshold(d, lam, mode="soft") for d in c[1:]]
y = pywt.waverec(c, "db4", mode="symmetric")[: x.shape[0]]
sf.write(sys.argv[2], y, rate, subtype="FLOAT")
"""


BARE_SWT = r"""
import sys, warnings, numpy as np, pywt, soundfile as sf
warnings.simplefilter("ignore", UserWarning)
x, rate = sf.read(sys.argv[1], dtype="float64")
n = x.shape[0]
level = max(1, min(pywt.dwt_max_level(n, 8) - 2, 12))
total = -(-n // 2 ** level) * 2 ** level
c = pywt.swt(pywt.pad(x, (0, total - n), "symmetric"), "db4", level=level, trim_approx=True,
             norm=True)
del x
d1 = np.abs(c[-1])
sigma = np.median(d1[d1 != 0]) / 0.6744897501960817
lam = sigma * np.sqrt(2 * np.log(n))
c = [c[0]] + [pywt.threshold(d, lam * 2.0 ** (-(level - i) / 2), mode="soft")
              for i, d in enumerate(c[1:])]
y = pywt.iswt(c, "db4", norm=True)[:n]
sf.write(sys.argv[2], y, rate, subtype="FLOAT")
"""

BARE_TABLE_READ = r"""
import io
def read(path):
    with open(path, encoding="utf-8") as fh:
        text = fh.read()
    x = np.loadtxt(io.StringIO(text.replace(",", ".")), delimiter=";", skiprows=1)
    return x[:, 1], int(round(1000.0 / (x[1, 0] - x[0, 0])))
"""

#: runs a command with the whole-file reader whatever the length (clean_whole, bands_whole)
IN_MEMORY = ("import sys; from scalesieve import memory_guard; "
             "memory_guard.STREAM_ABOVE = 1 << 62; "
             "from scalesieve.cli import main; sys.exit(main(sys.argv[1:]))")

#: runs a command with every recording taken in blocks (--force-blocks)
IN_BLOCKS = ("import sys; from scalesieve import memory_guard; memory_guard.STREAM_ABOVE = 0; "
             "from scalesieve.cli import main; sys.exit(main(sys.argv[1:]))")


def _write(path: str, n: int, rate: int = 51200) -> None:
    """Invented vibration: a shaft line, broadband noise and an impact every 0.1 s."""
    rng = np.random.default_rng(7)
    block = 1 << 20
    with sf.SoundFile(path, "w", samplerate=rate, channels=1, subtype="FLOAT") as f:
        for s in range(0, n, block):
            t = np.arange(s, min(n, s + block)) / rate
            x = 0.2 * np.sin(2 * np.pi * 24.5 * t) + 0.02 * rng.standard_normal(t.shape[0])
            x[(np.arange(s, s + t.shape[0]) % (rate // 10)) < 8] += 0.3
            f.write(x.astype(np.float32))


def _write_table(path: str, n: int, rate: int = 2000) -> None:
    """Invented strain logger export: slow drift, noise, a load step every 10 s."""
    rng = np.random.default_rng(7)
    block = 1 << 18
    with open(path, "w", encoding="utf-8") as f:
        f.write("time [ms];gauge 1 [µm/m]\n")
        for s in range(0, n, block):
            i = np.arange(s, min(n, s + block))
            x = 40 * np.sin(2 * np.pi * i / (rate * 3600)) + rng.standard_normal(i.shape[0])
            x += 25 * ((i // (10 * rate)) % 2)
            rows = np.column_stack([i * (1000.0 / rate), x])
            f.write("".join("%.1f;%.4f\n" % tuple(r) for r in rows.tolist()).replace(".", ","))


def _run(cmd: list[str]) -> dict:
    """Wall time and peak resident memory of one process (ru_maxrss: KiB on Linux)."""
    t0 = time.perf_counter()
    p = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    _, status, usage = os.wait4(p.pid, 0)
    seconds = time.perf_counter() - t0
    err = p.stderr.read().decode(errors="replace")
    p.stderr.close()
    p.returncode = os.waitstatus_to_exitcode(status)
    if p.returncode != 0:
        raise SystemExit(f"{' '.join(cmd)} failed ({p.returncode}): {err.strip()[-400:]}")
    return {"seconds": round(seconds, 3), "peak_mib": round(usage.ru_maxrss / 1024, 1)}


def _commands(src: str, out: str, force_blocks: bool = False) -> dict:
    me = [sys.executable, "-c", IN_BLOCKS] if force_blocks else [sys.executable, "-m",
                                                                  "scalesieve"]
    swt = ["--transform", "swt"]
    whole = [sys.executable, "-c", IN_MEMORY]
    blocks = [sys.executable, "-c", IN_BLOCKS]
    packet = ["--transform", "packet", "--level", "6"]
    best = [*packet, "--basis", "best", "--cost", "shannon"]
    return {
        # wavelet packets: always in blocks, beside the whole-array model on the same file
        "bands_packet": blocks + ["bands", src, "--json", *packet],
        "bands_packet_whole": whole + ["bands", src, "--json", *packet],
        "bands_packet_best": blocks + ["bands", src, "--json", *best],
        "bands_packet_best_whole": whole + ["bands", src, "--json", *best],
        "clean_packet": blocks + ["clean", src, "-o", out, "--threshold", "universal",
                                  "--force", *packet],
        "clean_packet_whole": whole + ["clean", src, "-o", out, "--threshold", "universal",
                                       "--force", *packet],
        "clean_whole": whole + ["clean", src, "-o", out, "--threshold", "universal", "--force"],
        "bands_whole": whole + ["bands", src, "--json"],
        "bands_periodization": me + ["bands", src, "--json", "--mode", "periodization"],
        "clean_swt": me + ["clean", src, "-o", out, "--threshold", "universal", "--force", *swt],
        "bands_swt": me + ["bands", src, "--json", *swt],
        "clean": me + ["clean", src, "-o", out, "--threshold", "universal", "--force"],
        "clean_workers": me + ["clean", src, "-o", out, "--threshold", "universal", "--force",
                               "--workers", "2"],
        "bands": me + ["bands", src, "--json"],
        "events": me + ["events", src, "--json"],
    }


def _bare(script: str, table: bool) -> str:
    """The bare script, reading a logger CSV with numpy.loadtxt when ``table``."""
    if not table:
        return script
    head, rest = script.split('x, rate = sf.read(sys.argv[1], dtype="float64")\n')
    return head + BARE_TABLE_READ + "x, rate = read(sys.argv[1])\n" + rest


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--samples", type=int, default=1 << 28)
    ap.add_argument("--no-bare", action="store_true", help="leave out the bare script")
    ap.add_argument("--only", default="clean,bands,events",
                    help="commands to run, comma-separated: clean, clean_workers (the same "
                         "clean in two local processes), bands, events (default "
                         "clean,bands,events); clean_swt and bands_swt: the same with "
                         "--transform swt, clean_swt beside a bare whole-array SWT script; "
                         "bands_periodization; clean_whole and bands_whole: the whole-file "
                         "reader, the budget lifted; bands_packet and bands_packet_best: "
                         "`bands --transform packet --level 6` (--basis full, best) always "
                         "in blocks, bands_packet_whole and bands_packet_best_whole the same "
                         "on the whole array; clean_packet and clean_packet_whole: "
                         "`clean --threshold universal` of the same packet bands")
    ap.add_argument("--table", action="store_true",
                    help="logger CSV inputs (time [ms], semicolon, decimal comma) instead of WAVs")
    ap.add_argument("--force-blocks", action="store_true",
                    help="every command in blocks whatever the length (both sizes alike)")
    ap.add_argument("--dir", default=None, help="folder for the test files (default a temp one)")
    args = ap.parse_args()
    wanted = args.only.split(",")
    sizes = {"long": args.samples, "short": args.samples // 4}
    figures: dict = {"samples": sizes, "machine": {"cpus": os.cpu_count(),
                                                   "load": os.getloadavg()},
                     "input": "csv" if args.table else "wav"}
    with tempfile.TemporaryDirectory(dir=args.dir) as tmp:
        for label, n in sizes.items():
            src = os.path.join(tmp, f"{label}.{'csv' if args.table else 'wav'}")
            (_write_table if args.table else _write)(src, n)
            out = os.path.join(tmp, f"{label}-out.wav")
            row = {}
            for name, cmd in _commands(src, out, args.force_blocks).items():
                if name in wanted:
                    row[name] = _run(cmd)
            if not args.no_bare and "clean" in wanted:
                script = os.path.join(tmp, "bare.py")
                with open(script, "w") as fh:
                    fh.write(_bare(BARE, args.table))
                row["bare"] = _run([sys.executable, script, src, os.path.join(tmp, "bare.wav")])
            if not args.no_bare and "clean_swt" in wanted:
                script = os.path.join(tmp, "bare_swt.py")
                with open(script, "w") as fh:
                    fh.write(_bare(BARE_SWT, args.table))
                row["bare_swt"] = _run([sys.executable, script, src,
                                        os.path.join(tmp, "bare.wav")])
            figures[label] = row
            os.unlink(src)
    long, short = figures["long"], figures["short"]
    ratios = {}
    if "bare" in long and "clean" in long:
        ratios["clean_over_bare_time"] = round(
            long["clean"]["seconds"] / long["bare"]["seconds"], 3)
    if "bare_swt" in long and "clean_swt" in long:
        ratios["clean_swt_over_bare_swt_time"] = round(
            long["clean_swt"]["seconds"] / long["bare_swt"]["seconds"], 3)
    if "clean" in long and "clean_workers" in long:
        ratios["clean_workers_over_clean_time"] = round(
            long["clean_workers"]["seconds"] / long["clean"]["seconds"], 3)
    for name in wanted:
        if name in long:
            ratios[f"{name}_long_over_short_time"] = round(
                long[name]["seconds"] / short[name]["seconds"], 3)
            ratios[f"{name}_long_over_short_memory"] = round(
                long[name]["peak_mib"] / short[name]["peak_mib"], 3)
    for name in ("clean", "bands", "bands_packet", "bands_packet_best", "clean_packet"):
        if name in long and f"{name}_whole" in long:
            ratios[f"{name}_over_{name}_whole_time"] = round(
                long[name]["seconds"] / long[f"{name}_whole"]["seconds"], 3)
            ratios[f"{name}_over_{name}_whole_memory"] = round(
                long[name]["peak_mib"] / long[f"{name}_whole"]["peak_mib"], 3)
    figures["ratios"] = ratios
    print(json.dumps(figures))


if __name__ == "__main__":
    main()
