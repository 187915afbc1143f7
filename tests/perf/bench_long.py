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

``--transform packet`` runs ``clean`` and ``bands`` as
``--transform packet --level J`` (``--level``, default 6) and, for ``clean``, beside
the bare whole-array script doing the same with ``pywt.WaveletPacket`` (VisuShrink
from node ``d``, every band but the lowest); ``--mode MODE`` gives every command
(and the bare scripts) that boundary mode:

    python tests/perf/bench_long.py --samples 268435456 --transform packet \
        --mode periodization --only clean,bands --no-bare --force-blocks

``--table`` writes the recordings as a logger's CSV instead (``time [ms]``,
semicolon, decimal comma); the bare script then reads it with
``numpy.loadtxt``, and ``clean_whole`` / ``bands_whole`` run the command with
the whole-file reader (the budget lifted) beside it.

The full size is for a quiet machine: the bare script alone holds about
8 GiB.  ``--no-bare`` leaves it out.

``--window``: the window instead of the commands.  On the ``--samples`` file
(which the window opens in long-recording mode) a window process opens it
twice (the summary built, then read back from a cache in a temporary
folder), and times a band mute to the repainted window (``grab``) on the
whole view and on a 10 s view, then the first threshold (VisuShrink on every
detail band: the first time, a pass to level 1 finds the finest band's noise)
and changes of its shape on the 10 s view, and a region edit's gain (d1 and d2
over 2 s mid-recording, muted and at -6 dB in turn) on the 10 s and the whole
view; beside it a window process opens a 10 M-sample file
(``--window-memory``) in memory and times the same mute and region edit.
Prints each process's peak resident memory and the ratios long / in memory.

    python tests/perf/bench_long.py --window --samples 268435456   # 1 GiB float32 WAV
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

BARE_PACKET = r"""
import sys, numpy as np, pywt, soundfile as sf
x, rate = sf.read(sys.argv[1], dtype="float64")
depth, mode = int(sys.argv[3]), sys.argv[4]
tree = pywt.WaveletPacket(x, "db4", mode, maxlevel=depth)
n = x.shape[0]
d1 = np.abs(tree["d"].data)
sigma = np.median(d1[d1 != 0]) / 0.6744897501960817
lam = sigma * np.sqrt(2 * np.log(n))
del x
for i, node in enumerate(tree.get_level(depth, "freq")):
    if i:
        tree[node.path] = pywt.threshold(node.data, lam, mode="soft")
y = tree.reconstruct(update=False)[:n]
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


def _commands(src: str, out: str, force_blocks: bool = False, transform: str | None = None,
              mode: str | None = None, level: int = 6) -> dict:
    me = [sys.executable, "-c", IN_BLOCKS] if force_blocks else [sys.executable, "-m",
                                                                  "scalesieve"]
    swt = ["--transform", "swt"]
    whole = [sys.executable, "-c", IN_MEMORY]
    blocks = [sys.executable, "-c", IN_BLOCKS]
    packet = ["--transform", "packet", "--level", str(level)]
    best = [*packet, "--basis", "best", "--cost", "shannon"]
    chosen = [] if transform is None else (
        packet if transform == "packet" else ["--transform", transform])
    cmds = _named(src, out, me, whole, blocks, swt, packet, best, chosen)
    if mode is not None:
        cmds = {name: cmd + ["--mode", mode] for name, cmd in cmds.items()}
    return cmds


def _named(src, out, me, whole, blocks, swt, packet, best, chosen) -> dict:
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
        "clean": me + ["clean", src, "-o", out, "--threshold", "universal", "--force", *chosen],
        "clean_workers": me + ["clean", src, "-o", out, "--threshold", "universal", "--force",
                               "--workers", "2"],
        # pieces where every level wraps, of the SWT and of packets, beside one process
        "clean_periodization": me + ["clean", src, "-o", out, "--threshold", "universal",
                                     "--force", "--mode", "periodization"],
        "clean_periodization_workers": me + ["clean", src, "-o", out, "--threshold",
                                             "universal", "--force", "--mode", "periodization",
                                             "--workers", "2"],
        "clean_swt_workers": me + ["clean", src, "-o", out, "--threshold", "universal",
                                   "--force", *swt, "--workers", "2"],
        "clean_packet_workers": me + ["clean", src, "-o", out, "--threshold", "universal",
                                      "--force", *packet, "--workers", "2"],
        "bands": me + ["bands", src, "--json", *chosen],
        "events": me + ["events", src, "--json"],
    }


def _moded(script: str, mode: str | None) -> str:
    """The bare DWT script in boundary mode ``mode`` (default its own, symmetric)."""
    return script if mode is None else script.replace('mode="symmetric"', f'mode="{mode}"')


def _bare(script: str, table: bool) -> str:
    """The bare script, reading a logger CSV with numpy.loadtxt when ``table``."""
    if not table:
        return script
    head, rest = script.split('x, rate = sf.read(sys.argv[1], dtype="float64")\n')
    return head + BARE_TABLE_READ + "x, rate = read(sys.argv[1])\n" + rest


WINDOW_LONG = r"""
import json, os, statistics, sys, time
os.environ["QT_QPA_PLATFORM"] = "offscreen"
from PySide6.QtWidgets import QApplication
from scalesieve.core.transforms import TransformSpec
from scalesieve.gui.app import make_application
from scalesieve.gui.long_window import LongWindow
path, repeat = sys.argv[1], int(sys.argv[2])
app = make_application()
app.setProperty("scalesieve_quiet_errors", True)
w = LongWindow()
w.resize(1600, 1000)
w.show()
t = time.perf_counter()
w.open_long(path, TransformSpec())
problem = w.wait_idle(7200)
if problem:
    sys.exit(problem)
w.grab()
opened = time.perf_counter() - t
def timed(action):
    asked = w.asked_number
    t = time.perf_counter()
    action()
    while w.asked_number == asked or w.painted_number < w.asked_number:
        QApplication.processEvents()
        time.sleep(0.0002)
    w.grab()
    return time.perf_counter() - t
mute = w.scale_map.rows.rows[3][1]
timed(mute.click); timed(mute.click)
whole = [timed(mute.click) for _ in range(repeat)]
exact_whole = w.picture.exact
rate = w.lr.rate
centre = w.lr.n // 2
w.set_view(centre - int(5 * rate), centre + int(5 * rate))
w.wait_idle()
zoomed = [timed(mute.click) for _ in range(repeat)]
from dataclasses import replace
from scalesieve.recipe import Edit
mid = centre / rate
w.regions.add(Edit("region", levels=(1, 2), start_s=mid - 1.0, stop_s=mid + 1.0, gain=0.0))
w.wait_idle()
def region_gain(g):
    return lambda: w.regions.replace_edit(0, replace(w.regions.edits[0], gain=g))
region_10s = [timed(region_gain(g)) for g in (0.5, 0.0) * max(1, repeat // 2)]
w.show_all()
w.wait_idle()
region_whole = [timed(region_gain(g)) for g in (0.5, 0.0) * max(1, repeat // 2)]
w.regions.select(0)
w.regions.remove_selected()
w.wait_idle()
w.set_view(centre - int(5 * rate), centre + int(5 * rate))
w.wait_idle()
th = w.scale_map.threshold
first = timed(lambda: th.rule.setCurrentIndex(th.rule.findData("universal")))
shapes = [timed(lambda s=s: th.shape.setCurrentIndex(th.shape.findData(s)))
          for s in ("hard", "soft") * max(1, repeat // 2)]
print(json.dumps({"open_s": round(opened, 3), "summary": "kept" if "cache" in
                  w.mode_line.text() else "built", "view_whole_exact": exact_whole,
                  "view_10s_exact": w.picture.exact,
                  "mute_whole_view_ms": round(1000 * statistics.median(whole), 2),
                  "mute_10s_view_ms": round(1000 * statistics.median(zoomed), 2),
                  "region_gain_10s_view_ms": round(1000 * statistics.median(region_10s), 2),
                  "region_gain_whole_view_ms": round(1000 * statistics.median(region_whole), 2),
                  "threshold_first_s": round(first, 3),
                  "threshold_shape_10s_view_ms": round(1000 * statistics.median(shapes), 2)}),
      flush=True)
w.close()
app.processEvents()
"""

WINDOW_MEMORY = r"""
import json, os, statistics, sys, time
os.environ["QT_QPA_PLATFORM"] = "offscreen"
from PySide6.QtWidgets import QApplication
from scalesieve.gui import window_settings as ws
from scalesieve.gui.app import make_application
from scalesieve.gui.main_window import MainWindow
path, repeat, folder = sys.argv[1], int(sys.argv[2]), sys.argv[3]
app = make_application()
app.setProperty("scalesieve_quiet_errors", True)
w = MainWindow(ws.open_settings(os.path.join(folder, "settings.ini")))
w.resize(1600, 1000)
w.show()
t = time.perf_counter()
w.open_path(path, ask_text_settings=False)
problem = w.adapter.wait_idle(600)
if problem:
    sys.exit(problem)
w.grab()
opened = time.perf_counter() - t
def timed(action):
    t = time.perf_counter()
    action()
    QApplication.processEvents()
    w.adapter.wait_idle(600, bands=False)
    QApplication.processEvents()
    w.grab()
    return time.perf_counter() - t
key = [k for k in w.adapter.model.band_keys if k != "a"][2]
mute = w.scale_map.headers[key].mute
timed(mute.click); timed(mute.click)
whole = [timed(mute.click) for _ in range(repeat)]
rate = w.adapter.model.recording.rate
mid = w.adapter.model.recording.duration_s / 2
w.time_axis.set_range(mid - 5, mid + 5)
w.adapter.wait_idle(600)
zoomed = [timed(mute.click) for _ in range(repeat)]
from dataclasses import replace
from scalesieve.recipe import Edit
mute.click()                                     # as it was: only the region below
w.adapter.wait_idle(600)
w.adapter.add_edit(Edit("region", levels=(1, 2), start_s=mid - 1.0, stop_s=mid + 1.0,
                        gain=0.0))
w.adapter.wait_idle(600)
def region_gain(g):
    i = len(w.adapter.model.edits) - 1
    return lambda: w.adapter.replace_edit(i, replace(w.adapter.model.edits[i], gain=g))
region_10s = [timed(region_gain(g)) for g in (0.5, 0.0) * max(1, repeat // 2)]
w.time_axis.set_range(0, w.adapter.model.recording.duration_s)
w.adapter.wait_idle(600)
region_whole = [timed(region_gain(g)) for g in (0.5, 0.0) * max(1, repeat // 2)]
print(json.dumps({"open_s": round(opened, 3),
                  "mute_whole_view_ms": round(1000 * statistics.median(whole), 2),
                  "mute_10s_view_ms": round(1000 * statistics.median(zoomed), 2),
                  "region_gain_10s_view_ms": round(1000 * statistics.median(region_10s), 2),
                  "region_gain_whole_view_ms": round(1000 * statistics.median(region_whole),
                                                     2)}),
      flush=True)
w.close()
app.processEvents()
"""


def _peak(cmd: list[str], env: dict) -> dict:
    """What a child prints as JSON, its wall time and its own peak resident memory (``wait4``)."""
    t0 = time.perf_counter()
    p = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env)
    out, err = [], []
    import threading

    def drain(stream, into):
        into.append(stream.read())
    threads = [threading.Thread(target=drain, args=(p.stdout, out)),
               threading.Thread(target=drain, args=(p.stderr, err))]
    for t in threads:
        t.start()
    _, status, usage = os.wait4(p.pid, 0)
    for t in threads:
        t.join()
    code = os.waitstatus_to_exitcode(status)
    if code != 0:
        raise SystemExit(f"a window process failed ({code}): "
                         f"{err[0].decode(errors='replace').strip()[-600:]}")
    row = json.loads(out[0].decode().strip().splitlines()[-1])
    row["process_s"] = round(time.perf_counter() - t0, 3)
    row["peak_mib"] = round(usage.ru_maxrss / 1024, 1)
    return row


def window_bench(args) -> None:
    """The window on a long recording beside the window on 10 M samples in memory."""
    figures: dict = {"samples": args.samples, "in_memory_samples": args.window_memory,
                     "machine": {"cpus": os.cpu_count(), "load": os.getloadavg()}}
    with tempfile.TemporaryDirectory(dir=args.dir) as tmp:
        env = dict(os.environ, SCALESIEVE_CACHE_DIR=os.path.join(tmp, "cache"))
        small = os.path.join(tmp, "memory.wav")
        _write(small, args.window_memory)
        figures["in_memory"] = _peak([sys.executable, "-c", WINDOW_MEMORY, small,
                                      str(args.repeat), tmp], env)
        os.unlink(small)
        src = os.path.join(tmp, "long.wav")
        _write(src, args.samples)
        long_cmd = [sys.executable, "-c", WINDOW_LONG, src, str(args.repeat)]
        figures["long_first_open"] = _peak(long_cmd, env)
        figures["long_from_cache"] = _peak(long_cmd, env)
    mem, first, again = figures["in_memory"], figures["long_first_open"], figures["long_from_cache"]
    figures["ratios"] = {
        "long_peak_gib": round(max(first["peak_mib"], again["peak_mib"]) / 1024, 3),
        "mute_whole_view_long_over_in_memory": round(
            again["mute_whole_view_ms"] / mem["mute_whole_view_ms"], 3),
        "mute_10s_view_long_over_in_memory": round(
            again["mute_10s_view_ms"] / mem["mute_10s_view_ms"], 3),
        "region_gain_whole_view_long_over_in_memory": round(
            again["region_gain_whole_view_ms"] / mem["region_gain_whole_view_ms"], 3),
        "region_gain_10s_view_long_over_in_memory": round(
            again["region_gain_10s_view_ms"] / mem["region_gain_10s_view_ms"], 3),
    }
    print(json.dumps(figures))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--samples", type=int, default=1 << 28)
    ap.add_argument("--no-bare", action="store_true", help="leave out the bare script")
    ap.add_argument("--only", default="clean,bands,events",
                    help="commands to run, comma-separated: clean, clean_workers (the same "
                         "clean in two local processes; also clean_periodization, "
                         "clean_swt and clean_packet, each with its _workers twin), bands, "
                         "events (default "
                         "clean,bands,events); clean_swt and bands_swt: the same with "
                         "--transform swt, clean_swt beside a bare whole-array SWT script; "
                         "bands_periodization; clean_whole and bands_whole: the whole-file "
                         "reader, the budget lifted; bands_packet and bands_packet_best: "
                         "`bands --transform packet --level 6` (--basis full, best) always "
                         "in blocks, bands_packet_whole and bands_packet_best_whole the same "
                         "on the whole array; clean_packet and clean_packet_whole: "
                         "`clean --threshold universal` of the same packet bands")
    ap.add_argument("--transform", choices=("dwt", "swt", "packet"), default=None,
                    help="clean and bands with this transform (packet: --level J, default 6; "
                         "the bare script then walks the same packet tree)")
    ap.add_argument("--mode", default=None,
                    help="every command and bare script in this boundary mode")
    ap.add_argument("--level", type=int, default=6, help="packet depth (default 6)")
    ap.add_argument("--table", action="store_true",
                    help="logger CSV inputs (time [ms], semicolon, decimal comma) instead of WAVs")
    ap.add_argument("--force-blocks", action="store_true",
                    help="every command in blocks whatever the length (both sizes alike)")
    ap.add_argument("--dir", default=None, help="folder for the test files (default a temp one)")
    ap.add_argument("--window", action="store_true",
                    help="the window on --samples (long-recording mode) beside the window on "
                         "--window-memory samples in memory (see the module's words)")
    ap.add_argument("--window-memory", type=int, default=10_000_000,
                    help="samples of the in-memory window beside it (default 10 M)")
    ap.add_argument("--repeat", type=int, default=9, help="edits timed per view (--window)")
    args = ap.parse_args()
    if args.window:
        window_bench(args)
        return
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
            for name, cmd in _commands(src, out, args.force_blocks, args.transform, args.mode,
                                       args.level).items():
                if name in wanted:
                    row[name] = _run(cmd)
            if not args.no_bare and "clean" in wanted:
                script = os.path.join(tmp, "bare.py")
                packets = args.transform == "packet"
                with open(script, "w") as fh:
                    fh.write(_bare(BARE_PACKET if packets else _moded(BARE, args.mode),
                                   args.table))
                extra = [str(args.level), args.mode or "symmetric"] if packets else []
                row["bare"] = _run([sys.executable, script, src, os.path.join(tmp, "bare.wav"),
                                    *extra])
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
    for name in wanted:             # X_workers beside X: the same clean in two processes
        one = name[:-len("_workers")]
        if name.endswith("_workers") and name in long and one in long:
            ratios[f"{name}_over_{one}_time"] = round(
                long[name]["seconds"] / long[one]["seconds"], 3)
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
