"""Benchmark: band figures of the SWT against the DWT's, and the window's switch to SWT.

Prints one JSON object, every figure measured side by side in this run:

* ``bands_dwt_s`` / ``bands_swt_s``: median wall time of
  ``scalesieve bands FILE`` with the default DWT and with ``--transform swt``
  (each a fresh process, so both include the start-up), and their ratio
  ``swt_over_dwt`` (target: within 4);
* ``swt_transform_s``: the SWT alone (``pywt.swt`` of every channel, as the
  model pads it), the floor the SWT's band figures stand on;
* ``window_switch_to_swt_s``: in the offscreen window with FILE open, the
  time from choosing the SWT to every pane and band row drawn (target:
  within 2 s), beside ``window_open_s`` (opening FILE with the DWT).

    python tests/perf/bench_bands.py [FILE] [--repeat 5] [--no-window]

FILE defaults to sample_signals/field_mic_clicks.flac.  The machine's load
average is printed too: other work on the same cores slows every figure.
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

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
DEFAULT = os.path.join(ROOT, "sample_signals", "field_mic_clicks.flac")


def cli_seconds(argv: list[str], repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        subprocess.run([sys.executable, "-m", "scalesieve", *argv], check=True,
                       stdout=subprocess.DEVNULL)
        times.append(time.perf_counter() - t)
    return statistics.median(times)


def swt_alone(path: str, repeat: int) -> float:
    import warnings

    import pywt
    import soundfile as sf

    from scalesieve.core import transforms as tf

    x, _ = sf.read(path, always_2d=True)
    spec = tf.TransformSpec(kind="swt").resolved(x.shape[0])
    total = tf.swt_padded_length(x.shape[0], spec.level)
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        for k in range(x.shape[1]):
            xp = pywt.pad(x[:, k], (0, total - x.shape[0]), spec.mode)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", UserWarning)
                pywt.swt(xp, spec.wavelet, level=spec.level, trim_approx=True, norm=True)
        times.append(time.perf_counter() - t)
    return statistics.median(times)


def window_switch(path: str, repeat: int) -> dict:
    from dataclasses import replace

    from PySide6.QtWidgets import QApplication

    from scalesieve.gui import window_settings as ws
    from scalesieve.gui.app import SNAPSHOT_SIZE, make_application
    from scalesieve.gui.main_window import MainWindow

    with tempfile.TemporaryDirectory() as tmp:
        app = make_application()
        app.setProperty("scalesieve_quiet_errors", True)
        window = MainWindow(ws.open_settings(os.path.join(tmp, "settings.ini")))
        window.resize(*SNAPSHOT_SIZE)
        window.show()
        QApplication.processEvents()

        def settled() -> None:
            problem = window.adapter.wait_idle(600)
            if problem:
                sys.exit(f"bench_bands: {problem}")
            pending = getattr(window.adapter, "bands_pending", lambda: False)
            while pending():
                QApplication.processEvents()
                time.sleep(0.002)
            QApplication.processEvents()
            window.grab()

        t = time.perf_counter()
        window.open_path(path, ask_text_settings=False)
        settled()
        opened = time.perf_counter() - t
        dwt = window.adapter.model.spec
        swt = replace(dwt, kind="swt")
        switches = []
        for _ in range(repeat):
            t = time.perf_counter()
            window.adapter.request_transform(swt)
            settled()
            switches.append(time.perf_counter() - t)
            assert window.adapter.model.spec.kind == "swt"
            window.adapter.request_transform(dwt)
            settled()
        window.close()
    return {"window_open_s": round(opened, 3),
            "window_switch_to_swt_s": round(statistics.median(switches), 3),
            "window_switch_to_swt_max_s": round(max(switches), 3)}


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("file", nargs="?", default=DEFAULT)
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--no-window", action="store_true")
    args = ap.parse_args()
    dwt = cli_seconds(["bands", args.file], args.repeat)
    swt = cli_seconds(["bands", args.file, "--transform", "swt"], args.repeat)
    out = {"file": os.path.basename(args.file), "repeat": args.repeat,
           "bands_dwt_s": round(dwt, 3), "bands_swt_s": round(swt, 3),
           "swt_over_dwt": round(swt / dwt, 2),
           "swt_transform_s": round(swt_alone(args.file, args.repeat), 3)}
    if not args.no_window:
        out.update(window_switch(args.file, args.repeat))
    out["load_average"] = [round(v, 2) for v in os.getloadavg()]
    print(json.dumps(out))


if __name__ == "__main__":
    main()
