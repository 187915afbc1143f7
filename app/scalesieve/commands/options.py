"""Options shared by the commands: transform, input, and how they combine."""

from __future__ import annotations

import argparse

from scalesieve.errors import ScalesieveError


def _positive_float(text: str) -> float:
    try:
        v = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if not (v > 0 and v < float("inf")):
        raise argparse.ArgumentTypeError(f"{text!r} must be a positive number")
    return v


def count(text: str, what: str = "") -> int:
    """A whole number of at least 1 (levels, workers, pieces), for argparse."""
    try:
        v = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if v < 1:
        raise argparse.ArgumentTypeError(f"{what}{v} must be at least 1" if what else
                                         "must be at least 1")
    return v


def _level(text: str) -> int:
    return count(text, "level ")


def _channel(text: str) -> int | str:
    """A 0-based channel number, or a channel's name (looked up when the file is read)."""
    try:
        v = int(text)
    except ValueError:
        if not text.strip():
            raise argparse.ArgumentTypeError("give a channel number or name") from None
        return text
    if v < 0:
        raise argparse.ArgumentTypeError("channels are numbered from 0")
    return v


def add_transform_options(p: argparse.ArgumentParser, transform_help: str | None = None,
                          level_help: str | None = None) -> None:
    """The transform options; ``transform_help``/``level_help`` where a command's defaults differ."""
    g = p.add_argument_group("transform")
    g.add_argument("--transform", choices=("dwt", "swt", "packet"), default=None,
                   help=transform_help or ("dwt (decimated, default), swt (undecimated) or "
                                           "packet (wavelet packet bands wJ.K of equal width)"))
    g.add_argument("--wavelet", default=None, metavar="NAME",
                   help="any discrete PyWavelets wavelet (default db4)")
    g.add_argument("--level", "--depth", type=_level, default=None, metavar="N",
                   help=level_help or "depth: how many levels the transform has (default: two "
                                      "short of the deepest the data allow, at most 12; --depth "
                                      "is the same option)")
    g.add_argument("--mode", default=None, metavar="MODE",
                   help="boundary mode as PyWavelets names it (default symmetric)")
    g.add_argument("--basis", choices=("full", "best"), default=None,
                   help="packet transform: every node at depth N (full, default) or the "
                        "least-cost tiling (best, Coifman & Wickerhauser 1992)")
    g.add_argument("--cost", choices=("shannon", "log-energy"), default=None,
                   help="cost of the best basis: shannon (-sum p ln p, default) or log-energy")


def add_input_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("input")
    g.add_argument("--rate", type=_positive_float, default=None, metavar="HZ",
                   help="sample rate, needed for a CSV/TXT without a time column")
    g.add_argument("--channel", type=_channel, default=None, metavar="K",
                   help="use only channel K (0-based number or the channel's name; default all)")
    g.add_argument("--group", default=None, metavar="NAME",
                   help="TDMS group or MDF channel group to read, when the file holds several")
    g.add_argument("--dataset", default=None, metavar="NAME",
                   help="MATLAB variable, HDF5 dataset or .npz array to read, when there are "
                        "several")
    g.add_argument("--fill-gaps", choices=("linear",), default=None, dest="fill_gaps",
                   help="fill empty or NaN cells of a text file, or NaN samples, by linear "
                        "interpolation")


def load_input(args, path: str):
    from scalesieve import api

    return api.load(path, rate=args.rate, channel=args.channel, fill_gaps=args.fill_gaps,
                    group=getattr(args, "group", None), dataset=getattr(args, "dataset", None))


def print_warnings(rec, path: str) -> None:
    """Each of the reader's warnings as one line on stderr (docs/reference.md).

    Called once the command has done its work, so a run that fails prints its
    one error line only.
    """
    import sys

    for w in rec.warnings:
        print(f"scalesieve: warning: {path}: {w}", file=sys.stderr)


def transform_from(args, recipe_spec=None):
    from scalesieve import api
    from scalesieve.core.transforms import MODES, discrete_wavelets

    if args.wavelet is not None and args.wavelet not in discrete_wavelets():
        raise ScalesieveError(f"--wavelet {args.wavelet!r} is not a discrete PyWavelets wavelet "
                              f"(for example db4, sym8, coif3, bior3.5, haar)")
    if args.mode is not None and args.mode not in MODES:
        raise ScalesieveError(f"--mode {args.mode!r} is not one of {', '.join(MODES)}")
    spec = api.merge_transform(recipe_spec, args.transform, args.wavelet, args.level, args.mode,
                               basis=getattr(args, "basis", None), cost=getattr(args, "cost", None))
    given = [f"--{o}" for o in ("basis", "cost") if getattr(args, o, None) is not None]
    if given and spec.kind != "packet":
        raise ScalesieveError(f"{' and '.join(given)} apply to --transform packet only "
                              f"(this transform is {spec.kind})")
    return spec
