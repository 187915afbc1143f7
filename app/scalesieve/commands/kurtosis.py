"""Find the packet band where impacts live: kurtosis of every band over depths 1..J.

The statistic is the Pearson kurtosis (fourth central moment over the squared
variance) of each wavelet packet band's own coefficients - about 3 for Gaussian
noise, large where short bursts stand out - read over the packet tree of depths
1..J: a wavelet-packet form of Antoni's spectral kurtosis (kurtogram, Antoni
2006, 2007). The table shows the kurtosis of all of a band's coefficients
(as `bands --json` does). The choice of the most impulsive band (`best`, the
band `envelope --band best` demodulates) uses the kurtosis of the band's
interior coefficients only: those not touched by the boundary extension
(derived from the filter length, level by level), and only bands with at
least 128 of them (when none has, all coefficients). Whether that band stands out
at all is tested against Gaussian noise: the normal score of its interior
kurtosis (Anscombe & Glynn 1983, as scipy.stats.kurtosistest), one-sided at 1 %
over all the bands of the table together (Bonferroni); on noise alone the
output says that no band stands out, and `best` still names the largest.
Figures support a judgement about a machine; decisions follow the applicable
standards and qualified people.
"""

from __future__ import annotations

import json
import os
import sys

from scalesieve.commands.options import (add_input_options, add_transform_options, load_input,
                                         print_warnings)
from scalesieve.errors import ScalesieveError


def configure(p) -> None:
    p.description = __doc__.strip()
    p.add_argument("file", metavar="FILE", help="recording (first channel unless --channel)")
    p.add_argument("--json", action="store_true", help="print JSON (shared contract)")
    add_threads_option(p)
    add_transform_options(p, level_help="deepest packet depth looked at (default 6)")
    add_input_options(p)


def add_threads_option(p) -> None:
    """``--threads N``: the threads the work is shared among (the figures do not depend on it)."""
    p.add_argument("--threads", type=int, default=None, metavar="N",
                   help="threads to share the work among (default: every core, at most 4, "
                        "or $SCALESIEVE_THREADS); 1 runs it in one; the figures are the same "
                        "for any number")


def thread_count(args) -> int:
    """The --threads value, else $SCALESIEVE_THREADS, else the default (core/threads.py)."""
    from scalesieve.core import threads as th

    try:
        return th.count(args.threads)
    except ValueError as exc:
        text = str(exc)
        raise ScalesieveError(f"--{text}" if text.startswith("threads ") else text) from None


def packet_options(args, n: int, source: str):
    """Wavelet, mode and depth for the packet tools; other transform kinds are refused."""
    from scalesieve.core import impulsive_bands as ib
    from scalesieve.core.transforms import MODES, discrete_wavelets

    if args.transform not in (None, "packet"):
        raise ScalesieveError(f"--transform {args.transform}: this command works on packet "
                              "bands (leave --transform out or give packet)")
    given = [f"--{o}" for o in ("basis", "cost") if getattr(args, o, None) is not None]
    if given:
        raise ScalesieveError(f"{' and '.join(given)}: this command looks at every packet band "
                              "of each depth, so no basis is chosen")
    wavelet = args.wavelet or "db4"
    if wavelet not in discrete_wavelets():
        raise ScalesieveError(f"--wavelet {wavelet!r} is not a discrete PyWavelets wavelet "
                              f"(for example db4, sym8, coif3, bior3.5, haar)")
    mode = args.mode or "symmetric"
    if mode not in MODES:
        raise ScalesieveError(f"--mode {mode!r} is not one of {', '.join(MODES)}")
    import pywt

    length = pywt.Wavelet(wavelet).dec_len
    top = pywt.dwt_max_level(n, length)
    if top < 1:
        raise ScalesieveError(f"{n} {'sample is' if n == 1 else 'samples are'} too few for packet bands "
                              f"with {wavelet} (filter length {length}: depth 1 needs at least "
                              f"{2 * (length - 1)}); use a shorter wavelet such as haar or a "
                              "longer recording", source)
    depth = args.level or min(ib.DEFAULT_DEPTH, max(1, top))
    if depth > top:
        raise ScalesieveError(f"--level {depth} is deeper than {n} samples allow for "
                              f"{wavelet} (at most {top})", source)
    return wavelet, mode, depth


def format_table(report: dict) -> str:
    lines = [f"{report['file']}: kurtosis of packet bands, depths 1-{len(report['levels'])} "
             f"(Gaussian noise gives about 3)"]
    for lv in report["levels"]:
        cells = " ".join("-" if b["kurtosis"] is None else f"{b['kurtosis']:.1f}"
                         for b in lv["bands"])
        lines.append(f"  depth {lv['level']}: {cells}")
    if report["best"]:
        lines.append(report["finding"])
    lines.append("Figures support a judgement about a machine; decisions follow the applicable "
                 "standards and qualified people.")
    return "\n".join(lines)


def finding(best: dict | None, stands_out: bool | None) -> str:
    """One line on the best band: impulsive, not beyond Gaussian noise, or not to be told."""
    if not best:
        return "no band carries anything beyond round-off"
    where = f"{best['name']} ({best['low_hz']:g}-{best['high_hz']:g} Hz)"
    inner = best.get("interior_kurtosis")
    if stands_out is None:
        return (f"most impulsive: {where}, kurtosis {best['kurtosis']:.2f} (too short for an "
                "interior figure, so not tested against Gaussian noise)")
    if not stands_out:
        return (f"no band stands out as impulsive: the largest, {where}, has kurtosis "
                f"{best['kurtosis']:.2f} ({inner:.2f} inside its edges), within what Gaussian "
                "noise gives (3)")
    return (f"most impulsive: {where}, kurtosis {best['kurtosis']:.2f}, interior kurtosis "
            f"{inner:.2f} (the choice uses this), beyond what Gaussian noise gives (3)")


def run(args) -> int:
    from scalesieve.core import band_choice
    from scalesieve.core import impulsive_bands as ib

    threads = thread_count(args)
    rec = load_input(args, args.file)
    source = rec.source or args.file
    print_warnings(rec, args.file)
    wavelet, mode, depth = packet_options(args, rec.n, source)
    try:
        t = ib.table(rec.samples[:, 0], rec.rate, wavelet, mode, depth, threads=threads)
    except ValueError as exc:
        raise ScalesieveError(str(exc), source) from None
    report = {"file": os.path.basename(args.file), "rate": rec.rate,
              "channel": rec.channel_names[0], "wavelet": wavelet, "mode": mode,
              "statistic": "pearson kurtosis of the packet coefficients (3 for Gaussian noise)",
              "best_statistic": "pearson kurtosis of the interior coefficients (those the "
                                "boundary extension does not touch), bands with at least "
                                f"{band_choice.MIN_INTERIOR} of them",
              "levels": t["levels"], "best": t["best"],
              "warnings": list(rec.warnings)}
    stands_out = band_choice.best_stands_out(t, rec.n, wavelet, mode)
    report["impulsive"] = stands_out
    report["finding"] = finding(t["best"], stands_out)
    if args.json:
        json.dump(report, sys.stdout)
        sys.stdout.write("\n")
    else:
        print(format_table(report))
    return 0
