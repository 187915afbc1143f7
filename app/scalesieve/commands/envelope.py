"""Envelope spectrum of one packet band: how often its impacts repeat.

The band is demodulated through its analytic signal (Hilbert transform) of the
band's own packet coefficients, at the band's rate (the band already sits
there, moved down to 0 Hz); the envelope's amplitude spectrum (mean removed,
Hann window) is searched for its ten largest peaks. That is the envelope of
what the band's node holds: the filters' skirts beyond the band enter folded
back into it, so peak frequencies agree with the envelope of the band's
time-domain component and amplitudes may differ somewhat; --exact takes that
component's own envelope at the full rate (slower: full-length FFTs). With --bearing N,d,D,ANGLE and
--shaft HZ the bearing's FTF, BPFO, BPFI and BSF (Randall & Antoni 2011, eqs.
1-4), their first harmonics and BPFI's shaft sidebands are matched to the
nearest peaks. Figures support a judgement about a machine; decisions follow
the applicable standards and qualified people.
"""

from __future__ import annotations

import json
import os
import sys

from scalesieve.commands.kurtosis import add_threads_option, packet_options, thread_count
from scalesieve.commands.options import (add_input_options, add_transform_options, load_input,
                                         print_warnings)
from scalesieve.errors import ScalesieveError


def configure(p) -> None:
    p.description = __doc__.strip()
    p.add_argument("file", metavar="FILE", help="recording (first channel unless --channel)")
    p.add_argument("--band", default="best", metavar="NAME|best",
                   help="packet band wJ.K, or best: the band of largest kurtosis over depths "
                        "1..J (default)")
    p.add_argument("--bearing", default=None, metavar="N,d,D,ANGLE",
                   help="rolling elements, element and pitch diameter (one unit), contact "
                        "angle in degrees")
    p.add_argument("--shaft", type=float, default=None, metavar="HZ",
                   help="shaft rotation rate in Hz (needed with --bearing)")
    p.add_argument("--exact", action="store_true",
                   help="envelope of the band's time-domain component at the full rate, "
                        "not of its coefficients at the band's rate (slower)")
    p.add_argument("--json", action="store_true", help="print JSON (shared contract)")
    p.add_argument("--csv", metavar="OUT", help="write the envelope spectrum (hz, amplitude)")
    p.add_argument("--force", action="store_true", help="replace an existing --csv file")
    add_threads_option(p)
    add_transform_options(p, level_help="deepest packet depth looked at (default 6)")
    add_input_options(p)


def format_text(rep: dict) -> str:
    b = rep["band"]
    lines = [f"{rep['file']}: envelope spectrum of {b['name']} ({b['low_hz']:g}-"
             f"{b['high_hz']:g} Hz), resolution {rep['resolution_hz']:.4g} Hz",
             "  largest peaks:"]
    lines += [f"    {p['hz']:10.3f} Hz  {p['amplitude']:.4g}" for p in rep["peaks"]]
    if "bearing" in rep:
        f = rep["bearing"]
        lines.append(f"  bearing: FTF {f['ftf_hz']:.3f} Hz, BPFO {f['bpfo_hz']:.3f} Hz, "
                     f"BPFI {f['bpfi_hz']:.3f} Hz, BSF {f['bsf_hz']:.3f} Hz")
        for ln in rep["lines"]:
            side = "" if not ln.get("sideband") else f" {'-' if ln['sideband'] < 0 else '+'}shaft"
            found = ("not found (its peak is nearer another line's)" if ln.get("ambiguous")
                     else "not found" if ln["found_hz"] is None else
                     f"peak {ln['found_hz']:.3f} Hz" + (
                         "" if ln["snr_db"] is None else f", {ln['snr_db']:.1f} dB over floor"))
            lines.append(f"    {ln['name'].upper()} x{ln['harmonic']}{side}: {ln['hz']:.3f} Hz, "
                         f"{found}")
    lines.append("Figures support a judgement about a machine; decisions follow the applicable "
                 "standards and qualified people.")
    return "\n".join(lines)


def run(args) -> int:
    from scalesieve.core import bearing as br
    from scalesieve.core import envelope as en

    geometry = None
    if args.bearing is not None:
        try:
            geometry = br.parse_geometry(args.bearing)
        except ValueError as exc:
            raise ScalesieveError(f"--bearing: {exc}") from None
        if args.shaft is None:
            raise ScalesieveError("--bearing needs --shaft HZ (the shaft's rotation rate)")
    if args.shaft is not None and not (0 < args.shaft < float("inf")):
        raise ScalesieveError(f"--shaft {args.shaft!r} must be a positive number of Hz")
    if args.csv:
        from scalesieve.io.atomic import check_target

        check_target(args.csv, force=args.force, protect=[args.file])
    threads = thread_count(args)
    rec = load_input(args, args.file)
    source = rec.source or args.file
    print_warnings(rec, args.file)
    wavelet, mode, depth = packet_options(args, rec.n, source)
    try:
        rep = en.report(rec.samples[:, 0], rec.rate, args.band, wavelet, mode, depth,
                        geometry, args.shaft, exact=args.exact, threads=threads)
    except ValueError as exc:
        raise ScalesieveError(str(exc), source) from None
    out = {"file": os.path.basename(args.file), "rate": rec.rate,
           "channel": rec.channel_names[0], "band": rep["band"],
           "resolution_hz": rep["resolution_hz"], "peaks": rep["peaks"],
           "envelope": rep["envelope"], "warnings": list(rec.warnings)}
    if "bearing" in rep:
        out["shaft_hz"] = args.shaft
        out["bearing"] = rep["bearing"]
        out["lines"] = rep["lines"]
    if args.csv:
        from scalesieve.io.writers import write_table_csv

        rows = ({"hz": float(f), "amplitude": float(a)}
                for f, a in zip(rep["freqs"], rep["amplitude"]))
        write_table_csv(args.csv, rows, force=args.force, fieldnames=("hz", "amplitude"),
                        protect=[args.file])
    if args.json:
        json.dump(out, sys.stdout)
        sys.stdout.write("\n")
    else:
        print(format_text(out))
    return 0
