"""Print the per-band table of a recording: Hz range, energy, RMS, peak, kurtosis."""

from __future__ import annotations

import json
import os
import sys

from scalesieve.commands.options import (add_input_options, add_transform_options,
                                         load_input, print_warnings, transform_from)


def configure(p) -> None:
    p.add_argument("file", metavar="FILE", help="WAV/FLAC/AIFF/OGG or CSV/TSV/TXT recording")
    p.add_argument("--json", action="store_true", help="print JSON (shared contract) instead of a table")
    add_transform_options(p)
    add_input_options(p)


def band_report(model, file_label: str) -> dict:
    rec = model.recording
    return {
        "file": file_label,
        "rate": rec.rate,
        "samples": rec.n,
        "duration_s": rec.duration_s,
        "transform": model.spec.to_json(),
        "channels": [{"index": k, "name": rec.channel_names[k], "bands": model.band_table(k)}
                     for k in range(rec.channels)],
        "start_time": rec.start_time.isoformat() if rec.start_time is not None else None,
        "warnings": list(rec.warnings),
    }


def format_table(report: dict) -> str:
    t = report["transform"]
    lines = [f"{report['file']}: {report['samples']} samples at {report['rate']:g} Hz "
             f"({report['duration_s']:.3f} s); {t['kind']} {t['wavelet']} level {t['level']} "
             f"mode {t['mode']}"]
    for ch in report["channels"]:
        lines.append(f"channel {ch['index']} ({ch['name']})")
        lines.append(f"  {'band':<5} {'from Hz':>10} {'to Hz':>10} {'count':>9} {'energy %':>9} "
                     f"{'RMS':>11} {'peak':>11} {'kurtosis':>9}")
        for b in ch["bands"]:
            k = "-" if b["kurtosis"] is None else f"{b['kurtosis']:.2f}"
            lines.append(f"  {b['name']:<5} {b['low_hz']:>10.4g} {b['high_hz']:>10.4g} "
                         f"{b['count']:>9d} {100 * b['energy_fraction']:>9.3f} "
                         f"{b['rms']:>11.4g} {b['peak']:>11.4g} {k:>9}")
    return "\n".join(lines)


def run(args) -> int:
    from scalesieve import api, memory_guard
    from scalesieve.commands import progress

    spec = transform_from(args)
    facts = memory_guard.check(args.file, channel=args.channel, transform=spec)
    with progress.for_file(args.file, args.channel, facts=facts) as bar:
        rec = load_input(args, args.file)
        model = api.build_model(rec, transform=spec, progress=bar)
    report = band_report(model, os.path.basename(args.file))
    print_warnings(rec, args.file)
    if args.json:
        json.dump(report, sys.stdout)
        sys.stdout.write("\n")
    else:
        print(format_table(report))
    return 0
