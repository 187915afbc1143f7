"""Open the desktop window on FILE (default: the demo recording)."""

from __future__ import annotations

import os

from scalesieve.commands.options import add_input_options, add_transform_options


def demo_path() -> str:
    here = os.path.dirname(os.path.abspath(__file__))
    for cand in (os.path.join(here, "..", "..", "..", "sample_signals", "pump_bearing.wav"),
                 os.path.join(here, "..", "resources", "pump_bearing.wav")):
        if os.path.exists(cand):
            return os.path.normpath(cand)
    return ""


def configure(p) -> None:
    p.add_argument("file", nargs="?", metavar="FILE", help="recording to open (default: demo)")
    p.add_argument("--recipe", metavar="R.json", help="recipe to apply on opening")
    p.add_argument("--snapshot", metavar="OUT.png",
                   help="draw the window offscreen at 1600x1000, write the PNG and exit")
    add_transform_options(p)
    add_input_options(p)


def run(args) -> int:
    # Until the window lands this prints the band table of the file.
    from scalesieve.commands import bands

    args.file = args.file or demo_path()
    args.json = False
    return bands.run(args)
