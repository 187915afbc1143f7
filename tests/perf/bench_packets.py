"""Benchmark: packet bands, the kurtosis table and the envelope spectrum.

Prints one JSON line of figures measured side by side in one run (medians of
``--repeat``, alternating):

* ``bands_packet_s`` vs ``bare_packet_s``: ``scalesieve bands FILE --transform
  packet --level 6 --json`` against a bare script that reads the same file
  with soundfile and walks ``pywt.WaveletPacket(...).get_level(6, "freq")``,
  each as a fresh process (imports included) on ``--bands-samples`` (4 M);
  the target is a ratio within 1.5; ``*_cached_s`` the same pair with compiled
  modules cached for both (PYTHONDONTWRITEBYTECODE, where set, makes every
  start compile this package's modules, not the libraries' installed ones);
  ``imports_s`` vs ``bare_imports_s``: a fresh process importing what the
  ``bands`` command imports before its work, against one importing numpy,
  pywt and soundfile (the part of the pair that is start-up);
* ``kurtosis_s``, ``envelope_s`` (band ``best``: the kurtosis search is part of
  it) and ``envelope_named_s`` (a named band) against ``wavedec_s``, one
  forward DWT of the recording by ``pywt.wavedec`` (db4, symmetric, its default
  level), on ``--samples`` (10 M); targets: within 3; each with the default
  thread count (``core.threads.count()``, ``threads_default``) and, as
  ``*_1thread_s``, with one thread; ``forward_dwt_s``: our own forward DWT
  (two threads from 4 M samples) beside it; this process keeps freed arrays
  for reuse, as the ``kurtosis`` and ``envelope`` commands do
  (``--default-allocator``: not); ``*_ratio_range``: the least and greatest of
  the ratios of each round;
* with ``--window``: a packet band's gain change in the window at
  ``--samples``, from the click to the repainted 1600x1000 window (target
  150 ms), beside one pass over the signal's memory;
* with ``--window``, for each transform of ``--window-kind`` (default
  ``packet,dwt``: the packet depth ``--window-level`` beside the DWT of the same
  recording), the window opening ``--samples`` in a fresh process of its own,
  alternating kinds in every round: ``window_<kind>_map_s`` until the Scale map
  is drawn (the model in place), ``window_<kind>_open_s`` until the adapter is
  idle with the band figures and the open lanes' envelopes, the longest pause
  of the event loop meanwhile (``window_<kind>_longest_pause_ms``, a 10 ms
  timer's ticks) and the process's peak resident memory before and after the
  open (``window_<kind>_rss_before_mb``/``_rss_mb``, ``peak_mb``);
* with ``--impacts``: the Impacts dock opened on ``--samples``: the longest
  pause of the window's event loop (gap between ticks of a 10 ms timer) while
  its panes work, and the time until both have drawn, beside the pause the
  same work makes when done in the window's thread (the kurtosis table and
  the envelope spectrum of ``best``, one after the other, as the panes once did).

    python tests/perf/bench_packets.py [--samples 10000000] [--bands-samples 4000000]
                                       [--repeat 3] [--window] [--impacts] [--only-window]
                                       [--window-kind packet,dwt,swt]
                                       [--no-bands] [--default-allocator]
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

BARE = """
import sys, soundfile as sf, pywt
x, rate = sf.read(sys.argv[1])
wp = pywt.WaveletPacket(x, "db4", "symmetric", maxlevel=6)
nodes = wp.get_level(6, order="freq")
print(len(nodes), sum(float((n.data ** 2).sum()) for n in nodes))
"""
#: what ``bands`` imports before its work (cli, the command, the guard, the reader, the model)
IMPORTS = ("import scalesieve.cli, scalesieve.commands.bands, scalesieve.api, "
           "scalesieve.memory_guard, scalesieve.io.readers, scalesieve.commands.progress")
BARE_IMPORTS = "import numpy, pywt, soundfile"


def recording(n: int, rate: float) -> np.ndarray:
    """Invented: hiss, a shaft tone, impacts at 97 Hz ringing at 4.1 kHz."""
    rng = np.random.default_rng(7)
    x = rng.normal(0.0, 0.01, n)
    t = np.arange(n) / rate
    x += 0.1 * np.sin(2 * np.pi * 25.0 * t)
    ring = np.arange(int(0.004 * rate)) / rate
    shape = 0.05 * np.exp(-ring / 0.0008) * np.sin(2 * np.pi * 4100.0 * ring)
    for tk in np.arange(0.003, n / rate - 0.01, 1 / 97.0):
        i = int(tk * rate)
        x[i:i + shape.size] += shape[:max(0, min(shape.size, n - i))]
    return x


def timed(fn, repeat: int) -> float:
    out = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        out.append(time.perf_counter() - t)
    return statistics.median(out)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--samples", type=int, default=10_000_000)
    ap.add_argument("--bands-samples", type=int, default=4_000_000)
    ap.add_argument("--rate", type=float, default=25600.0)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--window", action="store_true")
    ap.add_argument("--window-level", type=int, default=6)
    ap.add_argument("--window-kind", default="packet,dwt",
                    help="transforms the window opens side by side (packet, dwt, swt)")
    ap.add_argument("--open-child", default=None, help=argparse.SUPPRESS)
    ap.add_argument("--recording", default=None, help=argparse.SUPPRESS)
    ap.add_argument("--impacts", action="store_true")
    ap.add_argument("--only-window", action="store_true",
                    help="only the window figures (--window, --impacts)")
    ap.add_argument("--no-bands", action="store_true",
                    help="leave out the bands-against-a-bare-script pair (fresh processes)")
    ap.add_argument("--default-allocator", action="store_true",
                    help="leave glibc's allocator as it is (the commands ask it to keep freed "
                         "arrays for reuse, scalesieve.freed_memory; by default so does this)")
    args = ap.parse_args()
    if args.open_child:
        window_open_child(args.open_child, args.recording, args.rate, args.window_level)
        return
    from scalesieve.freed_memory import keep_freed_memory

    kept = False if args.default_allocator else keep_freed_memory()
    import pywt

    from scalesieve.core import envelope as en
    from scalesieve.core import impulsive_bands as ib
    from scalesieve.core import threads as th
    from scalesieve.core import transforms as tf

    res: dict = {"benchmark": "packets", "load_average": os.getloadavg()[0],
                 "freed_memory_kept": kept}
    if args.only_window:
        x = recording(args.samples, args.rate)
        res["samples"] = args.samples
        if args.window:
            res.update(window_gain(x, args.rate, args.window_level, args.repeat * 3))
            res.update(window_opens(args))
        if args.impacts:
            res.update(impacts_pause(x, args.rate, args.repeat))
        print(json.dumps(res))
        return
    if not args.no_bands:
        with tempfile.TemporaryDirectory() as tmp:
            path = os.path.join(tmp, "long.wav")
            sf.write(path, recording(args.bands_samples, args.rate).astype(np.float32),
                     int(args.rate), subtype="FLOAT")
            cmd = [sys.executable, "-m", "scalesieve", "bands", path, "--transform", "packet",
                   "--level", "6", "--json"]
            bare = [sys.executable, "-c", BARE, path]
            # as this shell runs them, and with compiled modules cached for both (in a
            # scratch folder): with PYTHONDONTWRITEBYTECODE set, every start compiles our
            # modules again while the libraries' are compiled at install
            cached = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
            cached["PYTHONPYCACHEPREFIX"] = os.path.join(tmp, "pyc")
            for argv in (cmd, bare):
                subprocess.run(argv, check=True, stdout=subprocess.DEVNULL, env=cached)
            ours, theirs, ours_c, theirs_c = [], [], [], []
            for _ in range(args.repeat):
                for argv, acc, env in ((cmd, ours, None), (bare, theirs, None),
                                       (cmd, ours_c, cached), (bare, theirs_c, cached)):
                    t = time.perf_counter()
                    subprocess.run(argv, check=True, stdout=subprocess.DEVNULL, env=env)
                    acc.append(time.perf_counter() - t)
            res["bands_samples"] = args.bands_samples
            res["bands_packet_s"] = round(statistics.median(ours), 3)
            res["bare_packet_s"] = round(statistics.median(theirs), 3)
            res["ratio_bands_to_bare"] = round(res["bands_packet_s"] / res["bare_packet_s"], 2)
            res["dont_write_bytecode"] = bool(os.environ.get("PYTHONDONTWRITEBYTECODE"))
            res["bands_packet_cached_s"] = round(statistics.median(ours_c), 3)
            res["bare_packet_cached_s"] = round(statistics.median(theirs_c), 3)
            res["ratio_bands_to_bare_cached"] = round(
                res["bands_packet_cached_s"] / res["bare_packet_cached_s"], 2)
            res["ratio_bands_to_bare_range"] = [
                round(min(a / b for a, b in zip(ours, theirs)), 2),
                round(max(a / b for a, b in zip(ours, theirs)), 2)]
            ours_i, bare_i = [], []
            for _ in range(args.repeat):
                for code, acc in ((IMPORTS, ours_i), (BARE_IMPORTS, bare_i)):
                    t = time.perf_counter()
                    subprocess.run([sys.executable, "-c", code], check=True)
                    acc.append(time.perf_counter() - t)
            res["imports_s"] = round(statistics.median(ours_i), 3)
            res["bare_imports_s"] = round(statistics.median(bare_i), 3)

    x = recording(args.samples, args.rate)
    spec = tf.TransformSpec().resolved(x.shape[0])
    default = th.count()
    res.update({"samples": args.samples, "threads_default": default})
    runs = {"wavedec": lambda: pywt.wavedec(x, "db4", "symmetric"),
            "forward_dwt": lambda: tf.forward(x, spec)}
    for suffix, threads in (("", default), ("_1thread", 1)):
        runs["kurtosis" + suffix] = (lambda t=threads: ib.table(
            x, args.rate, "db4", "symmetric", 6, threads=t))
        runs["envelope" + suffix] = lambda t=threads: en.report(x, args.rate, "best", threads=t)
        runs["envelope_named" + suffix] = lambda t=threads: en.report(
            x, args.rate, "w3.2", threads=t)
    got: dict = {k: [] for k in runs}
    en.report(x[:1 << 16], args.rate, "best")      # SciPy's FFT imported before any timing
    for _ in range(args.repeat):
        for name, fn in runs.items():      # side by side, alternating, in every round
            got[name].append(timed(fn, 1))
    f = statistics.median(got["wavedec"])
    for name, times in got.items():
        res[f"{name}_s"] = round(statistics.median(times), 3)
    for name in runs:
        if name in ("wavedec", "forward_dwt"):
            continue
        res[f"ratio_{name}_to_wavedec"] = round(statistics.median(got[name]) / f, 2)
        paired = [g / d for g, d in zip(got[name], got["wavedec"])]
        res[f"{name}_ratio_range"] = [round(min(paired), 2), round(max(paired), 2)]
    res["ratio_forward_dwt_to_wavedec"] = round(res["forward_dwt_s"] / f, 2)
    if args.window:
        res.update(window_gain(x, args.rate, args.window_level, args.repeat * 3))
        res.update(window_opens(args))
    if args.impacts:
        res.update(impacts_pause(x, args.rate, args.repeat))
    print(json.dumps(res))


def window_opens(args) -> dict:
    """Each kind of ``--window-kind`` opened in fresh processes, alternating in every round."""
    kinds = [k.strip() for k in args.window_kind.split(",") if k.strip()]
    for k in kinds:
        if k not in ("packet", "dwt", "swt"):
            sys.exit(f"bench_packets: --window-kind {k!r}: use packet, dwt or swt")
    got: dict = {k: [] for k in kinds}
    env = dict(os.environ)
    env.setdefault("QT_QPA_PLATFORM", "offscreen")
    with tempfile.TemporaryDirectory() as tmp:
        # the recording made once and read back whole by each child: making it takes
        # temporaries larger than the open's own peak
        path = os.path.join(tmp, "recording.npy")
        np.save(path, recording(args.samples, args.rate))
        for _ in range(args.repeat):
            for k in kinds:
                out = subprocess.run([sys.executable, __file__, "--open-child", k,
                                      "--rate", str(args.rate), "--recording", path,
                                      "--window-level", str(args.window_level)],
                                     check=True, capture_output=True, text=True, env=env)
                got[k].append(json.loads(out.stdout.strip().splitlines()[-1]))
    res: dict = {"window_kinds": kinds}
    for k, runs in got.items():
        for field in runs[0]:
            vals = [r[field] for r in runs]
            res[f"window_{k}_{field}"] = round(statistics.median(vals), 3)
    if "packet" in got and "dwt" in got:
        res["ratio_window_open_packet_to_dwt"] = round(
            res["window_packet_open_s"] / res["window_dwt_open_s"], 2)
    return res


def peak_mb() -> float:
    """This process's peak resident memory in MiB.

    Linux: ``VmHWM`` of /proc/self/status, the peak of this program's own memory;
    ``ru_maxrss`` there keeps the peak of the process that started it (across exec),
    here the benchmark's own.  Elsewhere ``ru_maxrss``.
    """
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024
    except OSError:
        pass
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def window_open_child(kind: str, path: str, rate: float, level: int) -> None:
    """One open in this fresh process: times, the longest pause, peak memory (one JSON line)."""
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from PySide6.QtCore import QTimer
    from PySide6.QtWidgets import QApplication

    from scalesieve.core.recording import Recording
    from scalesieve.core.transforms import TransformSpec
    from scalesieve.gui import window_settings as ws
    from scalesieve.gui.app import SNAPSHOT_SIZE, make_application
    from scalesieve.gui.main_window import MainWindow

    x = np.load(path)
    spec = (TransformSpec("packet", "db4", level, "symmetric") if kind == "packet"
            else TransformSpec(kind, "db4", None, "symmetric"))
    with tempfile.TemporaryDirectory() as tmp:
        app = make_application()
        app.setProperty("scalesieve_quiet_errors", True)
        window = MainWindow(ws.open_settings(os.path.join(tmp, "settings.ini")))
        window.resize(*SNAPSHOT_SIZE)
        window.show()
        app.processEvents()
        window.grab()                  # the empty window's first paint is not the open's
        rec = Recording(samples=x[:, None], rate=rate, channel_names=["ch0"], source="")
        before = peak_mb()
        marks: dict = {}
        ticks: list[float] = []
        timer = QTimer()
        timer.setInterval(10)
        timer.timeout.connect(lambda: ticks.append(time.perf_counter()))
        window.adapter.modelReplaced.connect(
            lambda: marks.setdefault("map", time.perf_counter()))
        timer.start()
        t = time.perf_counter()
        ticks.append(t)
        window.open_recording(rec, spec)
        problem = window.adapter.wait_idle(1200)
        if problem:
            sys.exit(f"bench_packets: {problem}")
        done = time.perf_counter()
        timer.stop()
        after = peak_mb()
        print(json.dumps({"map_s": marks.get("map", done) - t, "open_s": done - t,
                          "longest_pause_ms": 1000 * float(max(np.diff(ticks + [done]))),
                          "rss_before_mb": before, "rss_mb": after}))
        window.close()
        app.processEvents()


def impacts_pause(x: np.ndarray, rate: float, repeat: int) -> dict:
    """Longest event-loop pause while the Impacts panes work, beside doing it in line."""
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from PySide6.QtCore import QTimer
    from PySide6.QtWidgets import QApplication

    from scalesieve.core import envelope as en
    from scalesieve.core import impulsive_bands as ib
    from scalesieve.core.recording import Recording
    from scalesieve.core.transforms import TransformSpec
    from scalesieve.gui import window_settings as ws
    from scalesieve.gui.app import SNAPSHOT_SIZE, make_application
    from scalesieve.gui.main_window import MainWindow

    with tempfile.TemporaryDirectory() as tmp:
        app = make_application()
        app.setProperty("scalesieve_quiet_errors", True)
        window = MainWindow(ws.open_settings(os.path.join(tmp, "settings.ini")))
        window.resize(*SNAPSHOT_SIZE)
        window.show()
        rec = Recording(samples=x[:, None], rate=rate, channel_names=["ch0"], source="")
        window.open_recording(rec, TransformSpec("dwt", "db4", None, "symmetric"))
        problem = window.adapter.wait_idle(1200)
        if problem:
            sys.exit(f"bench_packets: {problem}")
        dock = window.impacts_dock
        imap, env = dock.impulse_map, dock.envelope
        ticks: list[float] = []
        timer = QTimer()
        timer.setInterval(10)
        timer.timeout.connect(lambda: ticks.append(time.perf_counter()))
        inline, pauses, ready = [], [], []
        for r in range(repeat):
            t = time.perf_counter()
            ib.table(x, rate, "db4", "symmetric", ib.DEFAULT_DEPTH)
            en.report(x, rate, "best", "db4", "symmetric", 6)
            inline.append(time.perf_counter() - t)
            dock.hide()
            imap.depth.setValue(ib.DEFAULT_DEPTH - (r % 2))    # a table not made yet
            env._for = env._spectrum = None
            ticks.clear()
            timer.start()
            t = time.perf_counter()
            ticks.append(t)
            dock.show()
            while imap.busy or env.busy:
                QApplication.processEvents()
                time.sleep(0.001)
            ready.append(time.perf_counter() - t)
            QApplication.processEvents()
            timer.stop()
            pauses.append(max(np.diff(ticks)) if len(ticks) > 1 else ready[-1])
        window.close()
        app.processEvents()
        return {"impacts_inline_pause_s": round(statistics.median(inline), 3),
                "impacts_longest_pause_ms": round(1000 * statistics.median(pauses), 1),
                "impacts_ready_s": round(statistics.median(ready), 3)}


def window_gain(x: np.ndarray, rate: float, level: int, repeat: int) -> dict:
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from PySide6.QtWidgets import QApplication

    from scalesieve.core.recording import Recording
    from scalesieve.core.transforms import TransformSpec
    from scalesieve.gui import window_settings as ws
    from scalesieve.gui.app import SNAPSHOT_SIZE, make_application
    from scalesieve.gui.main_window import MainWindow

    with tempfile.TemporaryDirectory() as tmp:
        app = make_application()
        app.setProperty("scalesieve_quiet_errors", True)
        window = MainWindow(ws.open_settings(os.path.join(tmp, "settings.ini")))
        window.resize(*SNAPSHOT_SIZE)
        window.show()
        rec = Recording(samples=x[:, None], rate=rate, channel_names=["ch0"], source="")
        t = time.perf_counter()
        window.open_recording(rec, TransformSpec("packet", "db4", level, "symmetric"))
        problem = window.adapter.wait_idle(1200)
        if problem:
            sys.exit(f"bench_packets: {problem}")
        pending = getattr(window.adapter, "bands_pending", lambda: False)
        while pending():
            QApplication.processEvents()
            time.sleep(0.002)
        load_s = time.perf_counter() - t
        m = window.adapter.model
        # a band's mute toggle on the Scale map's row header
        toggle = window.scale_map.headers[m.band_keys[len(m.band_keys) // 3]].mute
        refining = getattr(window.adapter, "refining", lambda: False)

        def click() -> None:
            toggle.click()
            QApplication.processEvents()
            window.grab()

        click()            # first mute: the model makes the band's component
        while refining():
            QApplication.processEvents()
            time.sleep(0.001)
        click()
        times = []
        for _ in range(repeat):
            t = time.perf_counter()
            click()
            times.append(time.perf_counter() - t)
            while refining():
                QApplication.processEvents()
                time.sleep(0.001)
        buf = np.empty_like(x)
        passes = []
        for _ in range(5):
            t = time.perf_counter()
            np.copyto(buf, x)
            passes.append(time.perf_counter() - t)
        window.close()
        app.processEvents()
        return {"window_level": level, "window_load_s": round(load_s, 2),
                "window_band_gain_ms": round(1000 * statistics.median(times), 1),
                "one_pass_ms": round(1000 * statistics.median(passes), 1)}


if __name__ == "__main__":
    main()
