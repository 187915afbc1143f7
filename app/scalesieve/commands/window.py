"""Open the desktop window on FILE (default: the demo recording)."""

from __future__ import annotations

import os

from scalesieve.commands.options import add_input_options, add_transform_options


def demo_path() -> str:
    here = os.path.dirname(os.path.abspath(__file__))
    for cand in (os.path.join(here, "..", "..", "..", "sample_signals", "pump_bearing.wav"),
                 os.path.join(here, "..", "sample_signals", "pump_bearing.wav")):
        if os.path.exists(cand):
            return os.path.normpath(cand)
    return ""


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


def run(args) -> int:
    # Qt is imported here only: the other commands never load it.
    from scalesieve.gui.app import run_window

    return run_window(args)
