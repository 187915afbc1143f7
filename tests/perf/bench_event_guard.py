"""Benchmark: what the event guard costs on the paint path, side by side in one run.

Prints one JSON object: the median time of painting the Scale map's row-header share
bars and a column of elided labels (``grab()`` of their column offscreen, their ``paintEvent``
as shipped, guarded by ``gui.event_guard.reported``) against the same widgets whose
``paintEvent`` is the unguarded function (``__wrapped__``), frame by frame in a turning
order, beside a second unguarded column (its ratio is the noise floor of the run); and a
bare call of a guarded against an unguarded method.

    python tests/perf/bench_event_guard.py [--widgets 64] [--rounds 6] [--frames 50]
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import time

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--widgets", type=int, default=64)
    ap.add_argument("--rounds", type=int, default=6)
    ap.add_argument("--frames", type=int, default=50)
    args = ap.parse_args()

    from PySide6.QtWidgets import QVBoxLayout, QWidget

    from scalesieve.gui.app import make_application
    from scalesieve.gui.elided_label import ElidedLabel
    from scalesieve.gui.event_guard import reported
    from scalesieve.gui.row_headers import ShareBar

    app = make_application()

    class BareShareBar(ShareBar):
        paintEvent = ShareBar.paintEvent.__wrapped__          # noqa: N815 - Qt's name

    class BareLabel(ElidedLabel):
        paintEvent = ElidedLabel.paintEvent.__wrapped__       # noqa: N815 - Qt's name

    def column(bar, label):
        w = QWidget()
        lay = QVBoxLayout(w)
        items = []
        for k in range(args.widgets):
            b = bar()
            b.set_share((k + 1) / (args.widgets + 1))
            t = label(f"d{k + 1}  {k * 125.5:g}–{(k + 1) * 125.5:g} Hz")
            lay.addWidget(b)
            lay.addWidget(t)
            items += [b, t]
        w.resize(160, 26 * args.widgets)
        w.show()
        return w, items

    guarded = column(ShareBar, ElidedLabel)
    bare = column(BareShareBar, BareLabel)
    again = column(BareShareBar, BareLabel)  # the same as ``bare``: the noise floor
    app.processEvents()                     # laid out

    painted = []

    class CountedLabel(ElidedLabel):
        def paintEvent(self, ev):                             # noqa: N802 - Qt's name
            painted.append(1)

    check = column(ShareBar, CountedLabel)
    app.processEvents()
    check[0].grab()
    if len(painted) < args.widgets:         # grab() paints every label of the column
        raise SystemExit(f"bench_event_guard: {len(painted)} of {args.widgets} labels painted")
    check[0].close()

    tops = {"guarded": guarded[0], "bare": bare[0], "again": again[0]}
    times = {k: [] for k in tops}
    order = list(tops)
    for f in range(args.rounds * args.frames):   # frame by frame, in a turning order
        if f % args.frames == 0:
            order = order[1:] + order[:1]
        for k in order:
            t = time.perf_counter()
            tops[k].grab()                  # every bar and label of the column painted
            times[k].append(time.perf_counter() - t)

    class Calls:
        def plain(self, ev):
            return ev

        @reported(once=True)
        def guarded(self, ev):
            return ev

    c = Calls()
    n = 200_000

    def calls(fn) -> float:
        t = time.perf_counter()
        for i in range(n):
            fn(i)
        return (time.perf_counter() - t) / n

    cg, cb = [], []
    for _ in range(5):
        cg.append(calls(c.guarded))
        cb.append(calls(c.plain))
    g, b, a = (statistics.median(times[k]) for k in ("guarded", "bare", "again"))
    print(json.dumps({
        "widgets_painted_per_frame": 2 * args.widgets,
        "frame_ms_guarded": round(1000 * g, 3), "frame_ms_unguarded": round(1000 * b, 3),
        "frame_guarded_over_unguarded": round(g / b, 3),
        "frame_unguarded_again_over_unguarded": round(a / b, 3),
        "call_ns_guarded": round(1e9 * statistics.median(cg), 1),
        "call_ns_plain": round(1e9 * statistics.median(cb), 1),
        "load_average": [round(v, 2) for v in os.getloadavg()],
        "rounds": args.rounds, "frames": args.frames}))
    for top in tops.values():
        top.close()


if __name__ == "__main__":
    main()
