"""Find and time-stamp transients at fine scales; list them, write JSON or CSV.

A coefficient of detail level j is an exceedance when |c| > k * sigma_j, with
sigma_j = median|d_j| / 0.6745 of that level; exceedances that overlap or
touch in time, across the chosen levels, merge into one event (see
scalesieve/core/events.py for how an event's extent is measured).

Timing: by default events are timed with the undecimated transform (SWT),
whatever the window or a recipe uses.  On invented bursts it places onsets
with a scatter of a few hundredths of a millisecond, where the decimated DWT,
which sees the signal only every 2**j samples, scatters by about ten times as
much and misses a few impacts of the demo pump recording; ``--transform dwt``
is there for comparison.  ``--wavelet``, ``--level`` and ``--mode`` are those
of the other commands (the level only fixes how the SWT pads the signal).

For a train of events (impacts of a bearing defect, beats) the dominant
interval, its rate in Hz and the spread of the single intervals are reported
per channel.  These are measurements to support a judgement: decisions about
machines follow the applicable standards and are made by qualified people,
and physiological traces are for research only, never for diagnosis.

No Qt is imported here.
"""

from __future__ import annotations

import json
import math
import os
import sys
from dataclasses import replace

from scalesieve.commands.options import (add_input_options, add_transform_options, load_input,
                                         print_warnings)
from scalesieve.errors import ScalesieveError

CAUTION = ("Note: event times and rates support a judgement, they do not make one: "
           "decisions about machines follow the applicable standards and qualified people; "
           "physiological traces are for research only, not for diagnosis.")


EPILOG = (
    "A coefficient of level j exceeds when |c| > k sigma_j, sigma_j = median|d_j| / 0.6745 "
    "of its own level (on Gaussian noise with probability 2(1 - Phi(k))); exceedances whose "
    "filter supports overlap or touch, across the chosen levels, form one event. Events are "
    "timed with the SWT unless --transform dwt: on invented bursts its onsets scatter about "
    "five times less than the DWT's, which sees every 2^j-th position only. For a train of "
    "events the dominant interval, its rate in Hz and their spread are reported per channel. "
    + CAUTION)


def _k(text: str) -> float:
    import argparse

    from scalesieve.core.events import check_k

    try:
        return check_k(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def configure(p) -> None:
    from scalesieve.core import events as ev

    p.add_argument("file", metavar="FILE", help="WAV/FLAC/AIFF/OGG or CSV/TSV/TXT recording")
    p.add_argument("--levels", default="1,2", metavar="LEVELS",
                   help="detail levels to search: 1,2 or 1-3 or details (default 1,2)")
    p.add_argument("--k", type=_k, default=ev.DEFAULT_K, metavar="K",
                   help="threshold in units of each level's noise sigma (default 5)")
    p.add_argument("--json", action="store_true",
                   help="print JSON (shared contract, plus repetition) instead of a table")
    p.add_argument("--csv", metavar="OUT", help="write the events to a CSV file, one per row")
    p.add_argument("--force", action="store_true", help="replace an existing --csv file")
    p.add_argument("--summary", action="store_true",
                   help="on screen, print the noise, the count and the repetition only")
    # For events the SWT is the default, not the DWT.
    add_transform_options(p, "swt (undecimated, default here: sharper timing) or dwt "
                             "(decimated)")
    add_input_options(p)
    p.epilog = EPILOG


def spec_from(args, n: int, source: str | None = None):
    """The resolved transform for events: shared options, SWT unless told otherwise."""
    from scalesieve.commands.options import transform_from
    from scalesieve.core import events as ev

    spec = transform_from(args)
    if spec.kind == "packet":
        raise ScalesieveError("--transform packet: events are found on DWT or SWT detail levels "
                              "(for packet bands use the kurtosis and envelope commands)")
    if args.transform is None:
        spec = replace(spec, kind=ev.DEFAULT_KIND)
    try:
        return spec.resolved(n)
    except ValueError as exc:
        raise ScalesieveError(str(exc), source) from None


def levels_from(text: str, spec, n: int):
    from scalesieve.core import events as ev
    from scalesieve.core.transforms import max_level
    from scalesieve.recipe import parse_levels

    try:
        return ev.check_levels(parse_levels(text), spec.level, max_level(n, spec.wavelet))
    except ValueError as exc:
        raise ScalesieveError(f"--levels: {exc}") from None


#: clock columns beside the seconds when the recording has its own clock
CLOCK_FIELDS = ("start_clock", "stop_clock", "peak_clock")


def event_rows(recording, events) -> list[dict]:
    """Events as dicts; with the recording's clock, its ISO 8601 times beside the seconds."""
    rows = [e.to_json() for e in events]
    for row in rows:                      # the file's own channel index (--channel K keeps K)
        row["channel"] = recording.file_index(row["channel"])
    if recording.start_time is not None:
        for row in rows:
            for field in CLOCK_FIELDS:
                at = recording.clock_at(row[field.replace("_clock", "_s")])
                row[field] = at.isoformat(timespec="microseconds")
    return rows


def _file_channel(recording, rep: dict | None) -> dict | None:
    return None if rep is None else {**rep, "channel": recording.file_index(rep["channel"])}


def events_report(recording, spec, levels, k, events, noise, file_label: str) -> dict:
    """The ``events --json`` document (docs/reference.md, plus compatible keys)."""
    from scalesieve.core.events import repetition_by_channel

    best, per = repetition_by_channel(events, recording.channels)
    return {
        "file": file_label,
        "rate": recording.rate,
        "levels": list(levels),
        "k": k,
        "noise": [{**r, "channel": recording.file_index(r["channel"])} for r in noise],
        "events": event_rows(recording, events),
        "start_time": (recording.start_time.isoformat()
                       if recording.start_time is not None else None),
        "warnings": list(recording.warnings),
        "samples": recording.n,
        "duration_s": recording.duration_s,
        "transform": spec.to_json(),
        "channels": [{"index": recording.file_index(c), "name": recording.channel_names[c]}
                     for c in range(recording.channels)],
        "repetition": _file_channel(recording, best),
        "repetition_by_channel": [_file_channel(recording, r) for r in per],
    }


def format_repetition(rep: dict) -> str:
    return (f"repetition (channel {rep['channel']}): rate {rep['rate_hz']:.4g} Hz "
            f"(spread {rep['spread_hz']:.2g} Hz), interval {1e3 * rep['interval_s']:.4g} ms "
            f"(spread {1e3 * rep['spread_s']:.2g} ms); {rep['count']} events in the train, "
            f"{rep['intervals']} intervals")


def format_report(report: dict, rows: bool = True) -> str:
    t = report["transform"]
    lv = ",".join(str(v) for v in report["levels"])
    lines = [f"{report['file']}: {report['samples']} samples at {report['rate']:g} Hz "
             f"({report['duration_s']:.3f} s); {t['kind']} {t['wavelet']} mode {t['mode']}; "
             f"levels {lv}; k = {report['k']:g}"]
    names = {c["index"]: c["name"] for c in report["channels"]}
    for c in names:
        sig = ", ".join(f"d{r['level']} {r['sigma']:.4g}" for r in report["noise"]
                        if r["channel"] == c)
        lines.append(f"noise sigma, channel {c} ({names[c]}): {sig}")
    evs = report["events"]
    counts = [sum(1 for e in evs if e["channel"] == c) for c in names]
    per = "" if len(names) == 1 else " (" + ", ".join(
        f"channel {c}: {n}" for c, n in zip(names, counts)) + ")"
    lines.append(f"{len(evs)} events{per}")
    if rows and evs:
        lines.append(f"  {'#':>5} {'ch':>3} {'start_s':>11} {'stop_s':>11} {'peak_s':>11} "
                     f"{'level':>5} {'score':>8} {'peak':>10}")
        for i, e in enumerate(evs, 1):
            lines.append(f"  {i:>5} {e['channel']:>3} {e['start_s']:>11.6f} {e['stop_s']:>11.6f} "
                         f"{e['peak_s']:>11.6f} {e['level']:>5d} {e['score']:>8.2f} "
                         f"{e['peak']:>10.4g}")
    reps = [r for r in report["repetition_by_channel"] if r is not None]
    if reps:
        lines.extend(format_repetition(r) for r in reps)
    else:
        lines.append("repetition: no regular train of events")
    lines.append(CAUTION)
    return "\n".join(lines)


def _in_blocks(args):
    """The events of a recording past the memory budget, found block by block; else None.

    The memory guard decides, with what events in blocks hold
    (``stream.choice.events_bytes``), and refuses what would not fit even so.
    """
    from datetime import timedelta
    from types import SimpleNamespace

    from scalesieve import memory_guard

    facts = memory_guard.probe_quietly(args.file)
    if facts is None or int(facts["frames"]) <= 0:
        return None  # an empty recording: the reader names it, as for every command
    spec = spec_from(args, int(facts["frames"]), args.file)
    facts = memory_guard.weigh(facts, args.file, channel=args.channel, transform=spec,
                               outputs=(), fill_gaps=args.fill_gaps,
                               levels=levels_from(args.levels, spec, int(facts["frames"])))
    if "in_blocks" not in facts:
        return None
    from scalesieve.commands.bands import _checked
    from scalesieve.stream.events import events_stream
    from scalesieve.stream.sources import open_source

    what = ("parsed in chunks into a temporary file, then read in blocks, four passes over "
            "the rows" if facts.get("kind") == "text"
            else "read in blocks, four passes over the file" + _checked(facts, args))
    print(f"scalesieve: note: {args.file}: {what}, about "
          f"{facts['in_blocks']['bytes'] / 2**20:.0f} MiB of memory "
          f"({memory_guard.blocks_reason(facts)})", file=sys.stderr)
    # a text table's rows are counted as it is parsed: the level follows that count
    src = open_source(args.file, args.channel, args.rate, fill_gaps=args.fill_gaps,
                      group=args.group, dataset=args.dataset)
    spec = spec_from(args, src.frames, args.file)
    levels = levels_from(args.levels, spec, src.frames)
    events, noise, got = events_stream(args.file, spec, levels, args.k, channel=args.channel,
                                       rate=args.rate, source=src)
    start = got["start_time"]
    rec = SimpleNamespace(rate=got["rate"], n=got["samples"], channels=got["channels"],
                          duration_s=got["samples"] / got["rate"],
                          channel_names=got["channel_names"], start_time=start,
                          warnings=tuple(got["warnings"]),
                          file_index=lambda k: k if got["pick"] is None else got["pick"],
                          clock_at=lambda s: (None if start is None else
                                              start + timedelta(seconds=float(s))))
    return rec, spec, levels, events, noise


def run(args) -> int:
    from scalesieve import api
    from scalesieve.core import events as ev
    from scalesieve.io.writers import write_table_csv

    if args.csv:
        api.check_target(args.csv, args.force, [args.file])
    if not (args.k > 0 and math.isfinite(args.k)):  # pragma: no cover - argparse checks
        raise ScalesieveError("--k must be a finite number above 0")
    blocks = _in_blocks(args)
    if blocks is not None:
        rec, spec, levels, events, noise = blocks
    else:
        rec = load_input(args, args.file)
        spec = spec_from(args, rec.n, rec.source or args.file)
        levels = levels_from(args.levels, spec, rec.n)
        prepared = {c: ev.prepare_signal(rec.channel(c), spec, levels)
                    for c in range(rec.channels)}
        events, noise = ev.detect_channels(prepared, rec.channel, rec.rate, args.k)
    report = events_report(rec, spec, levels, args.k, events, noise, os.path.basename(args.file))
    print_warnings(rec, args.file)
    if args.csv:
        fields = ev.FIELDS + (CLOCK_FIELDS if rec.start_time is not None else ())
        write_table_csv(args.csv, event_rows(rec, events), force=args.force,
                        fieldnames=fields, protect=[args.file])
    if args.json:
        json.dump(report, sys.stdout)
        sys.stdout.write("\n")
    else:
        print(format_report(report, rows=not args.summary))
        if args.csv:
            print(f"wrote {len(events)} events to {args.csv}")
    return 0
