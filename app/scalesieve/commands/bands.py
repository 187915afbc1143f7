"""Print the per-band table of a recording: Hz range, energy, RMS, peak, kurtosis."""

from __future__ import annotations

import json
import os
import sys

from scalesieve.commands.options import (add_input_options, add_transform_options,
                                         load_input, transform_from)


def configure(p) -> None:
    p.add_argument("file", metavar="FILE", help="WAV/FLAC/AIFF/OGG or CSV/TSV/TXT recording")
    p.add_argument("--json", action="store_true", help="print JSON (shared contract) instead of a table")
    add_transform_options(p)
    add_input_options(p)
    p.epilog = FIGURES_HELP


#: how each figure is defined (shown by --help; the README says the same)
FIGURES_HELP = (
    "Figures per band: energy = sum of squared samples of the band's time-domain component "
    "(the band alone through the inverse transform); energy % (energy_fraction) = that over "
    "the signal's sum of squares (in boundary-extended modes the coefficients also hold the "
    "extension, so this is not the coefficients' share; SWT shares need not sum to 100); "
    "coef_energy = sum of squared coefficients; RMS and peak = of the time-domain component; "
    "kurtosis = Pearson kurtosis of the coefficients (3 for Gaussian noise), '-' (null) where "
    "the band holds only round-off.")


def band_report(model, file_label: str) -> dict:
    rec = model.recording
    return {
        "file": file_label,
        "rate": rec.rate,
        "samples": rec.n,
        "duration_s": rec.duration_s,
        "transform": model.spec.to_json(),
        "channels": [{"index": rec.file_index(k), "name": rec.channel_names[k],
                      "bands": model.band_table(k)}
                     for k in range(rec.channels)],
        "start_time": rec.start_time.isoformat() if rec.start_time is not None else None,
        "warnings": list(rec.warnings),
    }


def _report_in_blocks(args, spec, progress) -> dict:
    """``band_report``'s fields for a recording longer than the budget, in one pass."""
    from scalesieve.stream.bands import band_figures_stream

    facts, channels = band_figures_stream(
        args.file, spec, channel=args.channel, rate=args.rate,
        progress=None if progress is None else (lambda f, t: progress(f, t)),
        fill_gaps=args.fill_gaps, group=args.group, dataset=args.dataset)
    pick, start = facts["pick"], facts["start_time"]
    return {
        "file": os.path.basename(args.file),
        "rate": facts["rate"],
        "samples": facts["samples"],
        "duration_s": facts["samples"] / facts["rate"],
        "transform": facts["spec"].to_json(),
        "start_time": start.isoformat() if start is not None else None,
        "warnings": facts["warnings"],
        "channels": [{"index": k if pick is None else pick, "name": facts["names"][k],
                      "bands": rows}
                     for k, rows in enumerate(channels)],
    }


def _checked(facts: dict, args) -> str:
    """What the note adds for the pass that checks a file before the work (stream.sources)."""
    if facts.get("kind") == "measurement" or args.fill_gaps is not None:
        return " after one that checks it"
    return ""


def _hz(v: float) -> str:
    """A band edge in Hz as a plain number: 12800, 5512.5, 0.390625 (no exponent)."""
    import numpy as np

    return np.format_float_positional(float(v), precision=6, unique=True, fractional=False,
                                      trim="-")


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
            lines.append(f"  {b['name']:<5} {_hz(b['low_hz']):>10} {_hz(b['high_hz']):>10} "
                         f"{b['count']:>9d} {100 * b['energy_fraction']:>9.3f} "
                         f"{b['rms']:>11.4g} {b['peak']:>11.4g} {k:>9}")
    return "\n".join(lines)


def run(args) -> int:
    from scalesieve import api, memory_guard
    from scalesieve.commands import progress

    spec = transform_from(args)
    facts = memory_guard.check(args.file, channel=args.channel, transform=spec, outputs=(),
                               fill_gaps=args.fill_gaps, packets=True)
    with progress.for_file(args.file, args.channel, facts=facts) as bar:
        if facts and facts.get("in_blocks"):
            # a best packet basis is chosen in a pass of its own (stream.packet_bands)
            count = "two passes" if spec.kind == "packet" and spec.basis == "best" \
                else "one pass"
            what = (f"parsed in chunks into a temporary file, then read in blocks, {count} "
                    "over the rows" if facts.get("kind") == "text"
                    else f"read in blocks, {count} over the file{_checked(facts, args)}")
            print(f"scalesieve: note: {args.file}: {what}, about "
                  f"{facts['in_blocks']['bytes'] / 2**20:.0f} MiB of memory "
                  f"({memory_guard.blocks_reason(facts)})", file=sys.stderr)
            report = _report_in_blocks(args, spec, bar)
        else:
            rec = load_input(args, args.file)
            model = api.build_model(rec, transform=spec, progress=bar)
            report = band_report(model, os.path.basename(args.file))
    if args.json:
        json.dump(report, sys.stdout)
        sys.stdout.write("\n")
    else:
        print(format_table(report))
    # after the work, so a failing run prints its one error line only
    for w in report["warnings"]:
        print(f"scalesieve: warning: {args.file}: {w}", file=sys.stderr)
    return 0
