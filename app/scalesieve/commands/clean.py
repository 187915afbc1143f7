"""Apply a recipe (or quick edits) to a recording and write the cleaned signal."""

from __future__ import annotations

import sys

from scalesieve.commands.options import (add_input_options, add_transform_options, count,
                                         transform_from)
from scalesieve.errors import ScalesieveError


def configure(p) -> None:
    p.add_argument("file", metavar="FILE", help="recording to clean (never overwritten)")
    p.add_argument("-o", "--output", required=True, metavar="OUT",
                   help="output file: the cleaned signal (.wav .flac .aiff .csv); format from "
                        "the extension")
    g = p.add_argument_group("edits (applied in this order: recipe, --zero, --threshold)")
    g.add_argument("--recipe", metavar="R.json", help="recipe file (version 1)")
    g.add_argument("--zero", "--mute", metavar="LEVELS",
                   help="mute bands (gain 0): 1,2 or 1-3 or details or all; 'a' is the "
                        "approximation (--mute is the same option)")
    g.add_argument("--threshold", metavar="RULE",
                   choices=("universal", "sure", "bayes", "minimax", "manual"),
                   help="threshold all detail levels: universal, sure, bayes, minimax, manual")
    g.add_argument("--shape", choices=("hard", "soft", "garrote"), default="soft",
                   help="threshold shape (default soft)")
    g.add_argument("--noise", choices=("finest", "level"), default="finest",
                   help="finest (default): sigma of level 1, carried to level j by the "
                        "transform's white-noise gain (1 for dwt, 2^-(j-1)/2 for swt); "
                        "level: each level's own sigma")
    g.add_argument("--value", type=float, default=None,
                   help="threshold value in signal units for --threshold manual")
    g.add_argument("--scale", type=float, default=1.0,
                   help="multiply the threshold by this factor (default 1)")
    g.add_argument("--threshold-levels", default="details", metavar="LEVELS",
                   help="levels --threshold applies to (default details)")
    o = p.add_argument_group("output")
    o.add_argument("--removed", metavar="OUT2",
                   help="also write the removed signal (original minus cleaned) to this file")
    o.add_argument("--subtype", metavar="SUBTYPE",
                   help="output sample format, e.g. PCM_16, PCM_24, FLOAT (default: as input)")
    o.add_argument("--save-recipe", metavar="R.json", dest="save_recipe",
                   help="also write the recipe as applied (every default resolved: level, "
                        "basis, the chosen packet paths)")
    o.add_argument("--force", action="store_true", help="replace existing output files")
    w = p.add_argument_group("one long recording on several workers (read in blocks)")
    where = w.add_mutually_exclusive_group()
    where.add_argument("--workers", type=count, default=None, metavar="N",
                       help="clean time pieces of the recording in N local processes")
    where.add_argument("--scheduler", metavar="ADDRESS",
                       help="clean time pieces on an existing Dask cluster (tcp:// or tls://; "
                            "its workers must reach FILE and OUT's folder under the same paths)")
    w.add_argument("--pieces", type=count, default=None, metavar="P",
                   help="cut the recording into P pieces (default: one per local worker, "
                        "two per worker thread of a cluster)")
    add_transform_options(p)
    add_input_options(p)


def edits_from_args(args):
    """Quick edits from --zero and --threshold, as recipe edits."""
    from scalesieve.recipe import Edit, parse_levels

    edits = []
    if args.zero:
        try:
            edits.append(Edit("gain", levels=parse_levels(args.zero), gain=0.0))
        except ValueError as exc:
            raise ScalesieveError(f"--zero: {exc}") from None
    if args.threshold:
        if args.threshold == "manual" and args.value is None:
            raise ScalesieveError("--threshold manual needs --value")
        if args.value is not None and not (args.value >= 0 and args.value < float("inf")):
            raise ScalesieveError("--value must be a finite number >= 0")
        if not (args.scale >= 0 and args.scale < float("inf")):
            raise ScalesieveError("--scale must be a finite number >= 0")
        try:
            levels = parse_levels(args.threshold_levels)
        except ValueError as exc:
            raise ScalesieveError(f"--threshold-levels: {exc}") from None
        edits.append(Edit("threshold", levels=levels, rule=args.threshold, shape=args.shape,
                          noise=args.noise, value=args.value, scale=args.scale))
    return edits


def _why_blocks(facts) -> str:
    """Why the guard chose blocks, for the note (nothing when it did not choose them)."""
    from scalesieve import memory_guard

    if not facts or "in_blocks" not in facts:
        return ""
    return f" ({memory_guard.blocks_reason(facts)})"


def run(args) -> int:
    from scalesieve import pipeline
    from scalesieve.commands import progress
    from scalesieve.recipe import load as load_recipe

    recipe = load_recipe(args.recipe) if args.recipe else None
    quick = edits_from_args(args)
    if recipe is None and not quick:
        raise ScalesieveError("nothing to do: give --recipe, --zero or --threshold")
    spec = transform_from(args, recipe.transform if recipe else None)
    if args.save_recipe:
        from scalesieve import api

        api.check_target(args.save_recipe, args.force,
                         [args.file] + ([args.recipe] if args.recipe else []))
        if args.save_recipe in (args.output, args.removed):
            raise ScalesieveError("--save-recipe names the same file as an output",
                                  args.save_recipe)
    facts = pipeline.guard(args.file, channel=args.channel, transform=spec,
                           outputs=[args.output] + ([args.removed] if args.removed else []),
                           fill_gaps=args.fill_gaps)
    # The same pipeline cleans each file of `scalesieve batch`: identical outputs.
    with progress.for_file(args.file, args.channel, facts=facts) as bar:
        if args.workers or args.scheduler:
            res = pipeline.clean_in_pieces(
                args.file, args.output, workers=args.workers, scheduler=args.scheduler,
                pieces=args.pieces, recipe=recipe, transform=spec, edits=quick,
                removed=args.removed, subtype=args.subtype, force=args.force, rate=args.rate,
                channel=args.channel, fill_gaps=args.fill_gaps, progress=bar,
                group=args.group, dataset=args.dataset)
        else:
            res = pipeline.clean_file(args.file, args.output, recipe=recipe, transform=spec,
                                      edits=quick, removed=args.removed, subtype=args.subtype,
                                      force=args.force, rate=args.rate, channel=args.channel,
                                      fill_gaps=args.fill_gaps, progress=bar,
                                      group=args.group, dataset=args.dataset, facts=facts,
                                      guarded=True)
    for w in res.get("warnings", ()):
        print(f"scalesieve: warning: {args.file}: {w}", file=sys.stderr)
    if args.save_recipe:
        from scalesieve import api

        api.save_recipe(res["recipe"], args.save_recipe, force=args.force)
    from scalesieve.io.writers import output_warnings

    for rep in res["outputs"]:
        for w in output_warnings(rep):
            print(f"scalesieve: warning: {w}", file=sys.stderr)
    if res.get("pieces"):
        spans = "; ".join(f"{p['start']}-{p['stop']}: {p['seconds']:.2f} s on {p['host']}"
                          f" ({p['pid']})" for p in res["pieces"])
        count = len(res["pieces"])
        print(f"scalesieve: note: {args.file}: cleaned in {count} piece{'s' * (count != 1)} on "
              f"{res['where']} in {res['pieces_seconds']:.2f} s: {spans}", file=sys.stderr)
    if res.get("blocks"):
        b = res["blocks"]
        parsed = "parsed in chunks into a temporary file, then " if b.get("table_parsed") else ""
        print(f"scalesieve: note: {args.file}: {parsed}cleaned in blocks of "
              f"{b['frames_per_block']} frames, {b['passes']} pass"
              f"{'es' if b['passes'] > 1 else ''} over the {'rows' if parsed else 'file'}, "
              f"about {b['bytes'] / 2**20:.0f} MiB of memory{_why_blocks(facts)}",
              file=sys.stderr)
    chans = f"{res['channels']} channel" + ("" if res["channels"] == 1 else "s")
    print(f"wrote {args.output}: {res['samples']} samples x {chans} at "
          f"{res['rate']:g} Hz; removed {100 * res['energy_removed_fraction']:.3g}% of the energy")
    return 0
