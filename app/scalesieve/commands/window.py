"""Open the desktop window on FILE (default: the demo recording)."""

from __future__ import annotations

from scalesieve.bundled_files import demo_path  # noqa: F401  (importable here as before)
from scalesieve.commands.options import add_input_options, add_transform_options
from scalesieve.errors import ScalesieveError

#: the size --snapshot draws the window at (docs/reference.md)
SNAPSHOT_SIZE = (1600, 1000)
#: bytes of in-memory model above which the window opens a recording in long-recording
#: mode (None: memory_guard.WINDOW_ABOVE, or less when less memory is free)
LONG_ABOVE = None


def configure(p) -> None:
    p.add_argument("file", nargs="?", metavar="FILE", help="recording to open (default: demo)")
    p.add_argument("--recipe", metavar="R.json", help="recipe to apply on opening")
    p.add_argument("--snapshot", metavar="OUT.png",
                   help="draw the window offscreen at 1600x1000, write the PNG and exit")
    p.add_argument("--snapshot-size", metavar="WxH",
                   help="the size --snapshot draws the window at (default 1600x1000)")
    p.add_argument("--force", action="store_true",
                   help="let --snapshot replace an existing file")
    g = p.add_argument_group("impacts (Impulse map and Envelope spectrum)")
    g.add_argument("--impacts", action="store_true",
                   help="open the Impacts dock (Impulse map, Envelope spectrum) on start")
    g.add_argument("--band", default=None, metavar="NAME",
                   help="packet band wJ.K to demodulate in the Envelope spectrum "
                        "(default: the most impulsive)")
    g.add_argument("--bearing", default=None, metavar="N,d,D,ANGLE",
                   help="bearing geometry whose lines the Envelope spectrum marks")
    g.add_argument("--shaft", type=float, default=None, metavar="HZ",
                   help="shaft rate in Hz, with --bearing")
    add_transform_options(p)
    add_input_options(p)


def parse_size(text: str | None) -> tuple[int, int]:
    """``1280x800`` as (1280, 800); None: the contract's 1600x1000."""
    if not text:
        return SNAPSHOT_SIZE
    try:
        w, h = (int(v) for v in text.lower().replace("×", "x").split("x"))
    except ValueError:
        raise ScalesieveError(f"--snapshot-size {text!r}: give WIDTHxHEIGHT, "
                              f"for example 1280x800") from None
    if not (640 <= w <= 8000 and 480 <= h <= 8000):
        raise ScalesieveError(f"--snapshot-size {text!r}: between 640x480 and 8000x8000")
    return w, h


def run(args) -> int:
    """Parse and load here (bad input: one line, exit 2), then open the window.

    The recording and recipe are read before any window opens; the window
    gets plain values, so the gui never reads the command line.
    """
    from scalesieve import api
    from scalesieve.commands.options import load_input, transform_from
    from scalesieve.recipe import load as load_recipe

    path = args.file or demo_path()
    if not path:
        raise ScalesieveError("no demo recording in this installation; give FILE")
    snapshot = args.snapshot
    if snapshot:
        api.check_target(snapshot, args.force, [path] + ([args.recipe] if args.recipe else []))
        if not snapshot.lower().endswith(".png"):
            raise ScalesieveError("--snapshot writes a PNG; give a name ending in .png",
                                  snapshot)
    size = parse_size(args.snapshot_size)
    if args.bearing is not None:
        from scalesieve.core import bearing as br

        try:
            br.parse_geometry(args.bearing)
        except ValueError as exc:
            raise ScalesieveError(f"--bearing: {exc}") from None
        if args.shaft is None:
            raise ScalesieveError("--bearing needs --shaft HZ (the shaft's rotation rate)")
    recipe = load_recipe(args.recipe) if args.recipe else None
    spec = transform_from(args, recipe.transform if recipe else None)
    edits = tuple(recipe.edits) if recipe else ()
    long = _long(args, path, spec)
    rec = None if long else load_input(args, path)
    # The one call from the command line into the gui; Qt is imported here only.
    import scalesieve.gui.app as window_app

    if long:
        # over the window's memory budget: read on demand, drawn from a summary
        return window_app.run_long_window(path, spec, edits, channel=args.channel,
                                          snapshot=snapshot, force=args.force, size=size)
    return window_app.run_window(rec, spec, edits, snapshot=snapshot, force=args.force,
                                 size=size, impacts=args.impacts, band=args.band,
                                 bearing=args.bearing, shaft=args.shaft)


def _long(args, path: str, spec) -> bool:
    """Whether FILE is over the window's memory budget; refuses what the long view cannot show."""
    from scalesieve import memory_guard
    from scalesieve.longview.span import why_not_long
    from scalesieve.stream.pipeline import not_streamable

    facts = memory_guard.probe_quietly(path)
    if not memory_guard.window_long(facts, channel=args.channel, transform=spec,
                                    budget=LONG_ABOVE):
        return False
    need = memory_guard.estimate(facts, channel=args.channel, transform=spec)
    why = (not_streamable(facts, spec, [], args.fill_gaps) if spec.kind == "dwt" else None) \
        or why_not_long(spec)
    if why is None and args.fill_gaps is not None:
        # the long view reads the file's samples as they are (longview.samples)
        why = "--fill-gaps needs the whole recording in the window"
    if why is None and (args.impacts or args.band or args.bearing):
        why = "the Impacts dock needs the whole recording in memory"
    if why is not None:
        raise ScalesieveError(f"needs about {need / 2**30:.1f} GiB of memory in the window, "
                              f"and the long-recording view cannot show it: {why}", path)
    from scalesieve.stream.pipeline import open_source

    open_source(path, args.channel, args.rate)      # the channel and --rate checked here
    return True
