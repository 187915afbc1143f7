"""Benchmark: the window on a long recording, offscreen.

Prints one JSON object: time from asking to open a 10-million-sample WAV
to the first full paint of every pane, and the median time from an edit
(band mute / unmute, region add / undo) to repainted panes, each beside
floors measured in the same run: reading the file, decomposing it
(the model alone), and one pass over the signal's memory.

    python tests/perf/bench_window.py [--samples 10000000] [--repeat 15]
    python tests/perf/bench_window.py --samples 10000000 --large 100000000 --repeat 5

"Repainted" means the model has changed, every pane has updated its
drawing and the whole 1600x1000 window has been rendered (``grab``).  The
metrics line of the Reconstruction pane follows a moment later (a full
pass over every band); its time is reported on its own.  A band's first
mute includes the model making that band's component; later mutes of the
same band use the model's cached one.  On a recording of 16 M samples or
more the window defers a mute's full pass: the panes are drawn at once,
the traces' envelopes from a fixed sample of each block where the pass is
still owed, and a sweep between events then makes them exact;
``band_mute_again`` is the time to that first repaint and
``band_mute_again_traces_exact`` to the repaint after the sweep (equal
below 16 M samples, where the pass is made before the repaint).  Region edits are timed on a 10 s
view (a 0.25 s region) and on the whole recording (a region 1 % of the
recording wide, about 10 pixels of the Scale map at any length: a fixed
number of seconds would shrink below the 3 pixels a drag must cover on a
long recording, and the window rightly ignores such a drag, so the edit
covers ten times the samples at ten times the length).  The same 0.25 s
region is also timed on the whole view (``*_whole_view_025s``, made as the
Events pane's "Mute as region" makes it): an edit of the same size, drawn
at the widest view.

The window shows a new recording in stages: the Scale map and the
Reconstruction pane first, the Bands pane's rows as their envelopes
arrive from a background thread.  ``first_paint_s`` is the time to the
first stage painted, ``all_bands_drawn_s`` to every band row drawn; while
loading, a 10 ms timer measures how long the event loop was ever kept
from running (``load_longest_event_gap_ms``).  The machine's load average is printed
too: other work on the same cores slows every figure.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import sys
import tempfile
import time

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import numpy as np  # noqa: E402
import soundfile as sf  # noqa: E402


def make_recording(path: str, n: int, rate: int) -> None:
    """Tones, noise and a train of short impacts (an invented test signal)."""
    rng = np.random.default_rng(20240)
    t = np.arange(n) / rate
    x = 0.2 * np.sin(2 * np.pi * 24.75 * t) + 0.05 * np.sin(2 * np.pi * 173.25 * t)
    x += 0.01 * rng.standard_normal(n)
    hits = np.arange(int(0.01 * rate), n - 400, int(rate / 87.3))
    ring = 0.1 * np.exp(-np.arange(300) / (0.001 * rate)) * np.sin(
        2 * np.pi * 3600 * np.arange(300) / rate)
    for h in hits:
        x[h:h + 300] += ring
    sf.write(path, x.astype(np.float32), rate, subtype="PCM_16")


def median_ms(values: list[float]) -> float:
    return round(1000 * statistics.median(values), 1)


def compare(args) -> None:
    """Both sizes in fresh processes, one after the other, and the ratios of their edit times."""
    import subprocess

    runs = []
    for n in (args.samples, args.large):
        out = subprocess.run([sys.executable, os.path.abspath(__file__), "--samples", str(n),
                              "--rate", str(args.rate), "--repeat", str(args.repeat)],
                             check=True, capture_output=True, text=True)
        runs.append(json.loads(out.stdout.strip().splitlines()[-1]))
    small, large = runs
    ratios = {key: round(large["edit_ms_median"][key] / small["edit_ms_median"][key], 2)
              for key in small["edit_ms_median"]}
    print(json.dumps({"small": small, "large": large, "edit_large_over_small": ratios,
                      "target_edit_large_over_small": 1.5}))


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--samples", type=int, default=10_000_000)
    ap.add_argument("--rate", type=int, default=48000)
    ap.add_argument("--repeat", type=int, default=15)
    ap.add_argument("--large", type=int, default=0, metavar="N",
                    help="also run N samples (in a fresh process after the first) and print "
                         "each edit's time at N over its time at --samples")
    args = ap.parse_args()
    if args.large:
        compare(args)
        return

    from PySide6.QtCore import qInstallMessageHandler
    from PySide6.QtWidgets import QApplication

    from scalesieve import api
    from scalesieve.recipe import Edit
    from scalesieve.gui import window_settings as ws
    from scalesieve.gui.app import SNAPSHOT_SIZE, _qt_message, make_application
    from scalesieve.gui.main_window import MainWindow

    with tempfile.TemporaryDirectory() as tmp:
        src = os.path.join(tmp, "long.wav")
        make_recording(src, args.samples, args.rate)
        qInstallMessageHandler(_qt_message)   # as the window's command line does
        app = make_application()
        app.setProperty("scalesieve_quiet_errors", True)
        window = MainWindow(ws.open_settings(os.path.join(tmp, "settings.ini")))
        window.resize(*SNAPSHOT_SIZE)
        window.show()
        QApplication.processEvents()

        def paint() -> None:
            QApplication.processEvents()      # the panes' zero-delay redraws
            window.grab()                     # render the whole window

        from PySide6.QtCore import QTimer

        ticks = []
        probe = QTimer()
        probe.setInterval(10)
        probe.timeout.connect(lambda: ticks.append(time.perf_counter()))
        t0 = time.perf_counter()
        probe.start()
        window.open_path(src, ask_text_settings=False)
        try:   # the first stage only: the band rows may still be coming
            problem = window.adapter.wait_idle(600, bands=False)
        except TypeError:   # a window that draws every band before it shows
            problem = window.adapter.wait_idle(600)
        if problem:
            sys.exit(f"bench_window: {problem}")
        paint()
        first_paint = time.perf_counter() - t0
        pending = getattr(window.adapter, "bands_pending", lambda: False)
        while pending():
            QApplication.processEvents()
            time.sleep(0.002)
        paint()
        all_bands = time.perf_counter() - t0
        probe.stop()
        gaps = np.diff([t0] + ticks) if ticks else np.array([all_bands])
        longest_gap = float(gaps.max())

        # Floors, side by side in this run.
        t = time.perf_counter()
        rec = api.load(src)
        read_s = time.perf_counter() - t
        t = time.perf_counter()
        bare = api.build_model(rec)
        build_s = time.perf_counter() - t
        del bare
        x = window.adapter.model.original(0)
        buf = np.empty_like(x)
        passes = []
        for _ in range(5):
            t = time.perf_counter()
            np.copyto(buf, x)
            passes.append(time.perf_counter() - t)
        one_pass = statistics.median(passes)
        del buf

        m = window.adapter.model
        bands = window.bands
        keys = [k for k in m.band_keys if k != "a"]

        refining = getattr(window.adapter, "refining", lambda: False)
        exact = []

        def timed(action) -> float:
            t = time.perf_counter()
            action()
            paint()
            took = time.perf_counter() - t
            if refining():
                # a long recording: the sweep makes the traces exact between events
                while refining():
                    QApplication.processEvents()
                    time.sleep(0.001)
                paint()
            exact.append(time.perf_counter() - t)
            # Let the deferred metrics line run outside the timing, as a user pause would.
            window.reconstruction.update_metrics()
            return took

        first_mute, mute, unmute, metrics = [], [], [], []
        for key in keys:
            # The first mute of a band: the model makes that band's component.
            row = window.scale_map.headers[key]
            first_mute.append(timed(row.mute.click))
            unmute.append(timed(row.mute.click))
        row = window.scale_map.headers[keys[2]]
        mute_exact = []
        for _ in range(args.repeat):
            mute.append(timed(row.mute.click))
            mute_exact.append(exact[-1])
            t = time.perf_counter()
            window.reconstruction.update_metrics()
            metrics.append(time.perf_counter() - t)
            unmute.append(timed(row.mute.click))
        dur = m.recording.duration_s
        region, undo = {}, {}
        for label, span, width in (("zoomed_10s", 10.0, 0.25), ("whole_view", dur, 0.01 * dur),
                                   ("whole_view_025s", dur, 0.25)):
            region[label], undo[label] = [], []
            for i in range(args.repeat):
                centre = dur * (0.1 + 0.8 * i / args.repeat)
                window.time_axis.set_range(centre - span / 2, centre + span / 2)
                paint()
                t0_ = window.time_axis.t0 + 0.4 * (window.time_axis.t1 - window.time_axis.t0)
                if label == "whole_view_025s":
                    # Too narrow to drag at this view: the edit the Events pane's
                    # "Mute as region" makes for a short event.
                    edit = Edit("region", levels=(1, 2, 3), start_s=round(t0_, 6),
                                stop_s=round(t0_ + width, 6), gain=0.0)
                    region[label].append(timed(lambda: window.adapter.add_edit(edit)))
                else:
                    # The same call a rectangle dragged over d1..d3 makes.
                    region[label].append(timed(
                        lambda: window.scale_map._rectangle_drawn(t0_, t0_ + width, 0.2, 2.8)))
                assert len(m.edits) == 1, "the rectangle made no region edit"
                undo[label].append(timed(window.adapter.undo))
                window.adapter.settle_now()
        window.time_axis.show_all()

        report = {
            "samples": args.samples, "rate": args.rate, "window": list(SNAPSHOT_SIZE),
            "transform": m.spec.to_json(),
            "first_paint_s": round(first_paint, 3),
            "all_bands_drawn_s": round(all_bands, 3),
            "load_longest_event_gap_ms": round(1000 * longest_gap, 1),
            "floor_read_file_s": round(read_s, 3),
            "floor_decompose_s": round(build_s, 3),
            "first_paint_over_read_plus_decompose": round(first_paint / (read_s + build_s), 2),
            "edit_ms_median": {
                "band_mute_again": median_ms(mute),
                "band_mute_again_traces_exact": median_ms(mute_exact),
                "band_unmute": median_ms(unmute),
                "band_mute_first_time": median_ms(first_mute),
                "region_add_zoomed_10s": median_ms(region["zoomed_10s"]),
                "region_undo_zoomed_10s": median_ms(undo["zoomed_10s"]),
                "region_add_whole_view": median_ms(region["whole_view"]),
                "region_undo_whole_view": median_ms(undo["whole_view"]),
                "region_add_whole_view_025s": median_ms(region["whole_view_025s"]),
                "region_undo_whole_view_025s": median_ms(undo["whole_view_025s"])},
            "metrics_line_ms_median": median_ms(metrics),
            "floor_one_pass_ms": round(1000 * one_pass, 1),
            "band_mute_again_over_one_pass": round(statistics.median(mute) / one_pass, 1),
            "full_passes_deferred": bool(getattr(m, "defer_from", None) is not None
                                         and m.recording.n >= m.defer_from),
            "region_add_zoomed_over_one_pass": round(
                statistics.median(region["zoomed_10s"]) / one_pass, 1),
            "load_average": [round(v, 2) for v in os.getloadavg()],
            "repeat": args.repeat,
        }
        print(json.dumps(report))
        window.close()


if __name__ == "__main__":
    main()
