"""Apply one recipe to many recordings, on local processes or a Dask cluster."""

from __future__ import annotations

import os
import sys

from scalesieve.commands.options import (add_input_options, add_transform_options, count,
                                         transform_from)
from scalesieve.errors import ScalesieveError


def configure(p) -> None:
    p.add_argument("inputs", nargs="+", metavar="INPUT",
                   help="recordings, folders of recordings, or patterns such as 'runs/*.wav'")
    p.add_argument("--recipe", required=True, metavar="R.json",
                   help="recipe file (version 1), e.g. exported from the window")
    p.add_argument("-o", "--output", "--outdir", required=True, metavar="OUTDIR",
                   help="output folder: gets OUTDIR/<input name> per input and "
                        "batch-report.json (created if missing)")
    where = p.add_mutually_exclusive_group()
    where.add_argument("--workers", type=count, default=None, metavar="N",
                       help="local processes (default: one per available CPU)")
    where.add_argument("--scheduler", metavar="ADDRESS",
                       help="run on an existing Dask distributed cluster, e.g. "
                            "tcp://10.0.0.5:8786 (needs pip install \"scalesieve[cluster]\")")
    p.add_argument("--send-data", action="store_true", dest="send_data",
                   help="with --scheduler: send each file through the cluster instead of "
                        "letting workers open the paths (for small files, no shared storage)")
    p.add_argument("--force", action="store_true",
                   help="replace existing outputs and report (inputs are never overwritten)")
    p.add_argument("--subtype", metavar="SUBTYPE",
                   help="output sample format, e.g. PCM_16, PCM_24, FLOAT (default: as input)")
    p.add_argument("--no-progress", action="store_true", dest="no_progress",
                   help="no progress bar, even on a terminal")
    add_transform_options(p)
    add_input_options(p)


def run(args) -> int:
    from scalesieve import batch
    from scalesieve.recipe import load as load_recipe

    recipe = load_recipe(args.recipe)
    spec = transform_from(args, recipe.transform)
    if args.send_data and not args.scheduler:
        raise ScalesieveError("--send-data only applies with --scheduler")

    bar = None
    failures: list[str] = []

    def note(entry: dict) -> None:
        if entry["status"] != "ok":
            failures.append(entry["input"])
            line = f"scalesieve: error: {entry['error']}"
            if bar is not None:
                bar.write(line, file=sys.stderr)
            else:
                print(line, file=sys.stderr)
        if bar is not None:
            bar.update(1)

    def start(count: int) -> None:
        nonlocal bar
        if args.no_progress or not sys.stderr.isatty():
            return
        from tqdm import tqdm

        class _Bar(tqdm):
            # No monitor thread: local workers are forked only while one thread runs.
            monitor_interval = 0

        bar = _Bar(total=count, unit="file", file=sys.stderr, desc="cleaning")

    try:
        report = batch.run_batch(
            args.inputs, args.output, recipe, transform=spec, workers=args.workers,
            scheduler=args.scheduler, send_data=args.send_data, force=args.force,
            subtype=args.subtype, rate=args.rate, channel=args.channel,
            fill_gaps=args.fill_gaps, on_start=start, on_result=note, recipe_file=args.recipe,
            group=args.group, dataset=args.dataset)
    finally:
        if bar is not None:
            bar.close()
    report_path = os.path.join(args.output, batch.REPORT_NAME)
    total = len(report["files"])
    for e in report["files"]:
        for w in e.get("warnings") or ():  # what the readers said of each input
            print(f"scalesieve: warning: {e['input']}: {w}", file=sys.stderr)
        for w in e.get("output_warnings") or ():  # what the writers did (as clean says)
            print(f"scalesieve: warning: {w}", file=sys.stderr)
        if e.get("blocks"):       # past the memory budget: what clean says of it
            b = e["blocks"]
            print(f"scalesieve: note: {e['input']}: cleaned in blocks, {b['passes']} pass"
                  f"{'es' if b['passes'] > 1 else ''}, about {b['bytes'] / 2**20:.0f} MiB "
                  "of memory", file=sys.stderr)
    print(f"batch: {report['ok']} of {total} files cleaned into {args.output} "
          f"in {report['seconds']:.3g} s; report {report_path}")
    if report["failed"]:
        print(f"scalesieve: {report['failed']} of {total} files failed; details in "
              f"{report_path}", file=sys.stderr)
        return 1
    return 0
