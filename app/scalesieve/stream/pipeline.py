"""One recording cleaned block by block: read, forward DWT, recipe, inverse, write.

``clean_stream(input, output, ...)`` takes the arguments of
``scalesieve.batch.clean_file`` and returns the same report, so it can
stand in for it on a recording longer than memory.  Memory holds a block
of samples, each level's filter history and the coefficients the inverse
has not yet used, whatever the recording's length.

Rules that look at whole bands get what they need from first passes over
the file that run only the levels they need: the finest band's median for
``noise: finest`` (two passes, see ``statistics``), each level's median for
``noise: level``, the band's sum of squares for BayesShrink, the band's
values for SURE (SURE sorts the whole band, so that band is kept in memory
while its threshold is found).  The thresholds, and so the cleaned samples,
are the whole-array ones up to float round-off.

The parts live beside it: ``sources`` (the samples in blocks), ``targets``
(outputs written in blocks and the join of the channels), ``recipe_plan``
(each band's chain of edits and the first passes its thresholds need),
``swt_clean`` (the SWT's passes over its circle), ``packet_clean`` (wavelet
packets: the tree's passes, the inverse tree) and ``choice`` (what can run in
blocks, and about what it holds).
"""

import contextlib
import os
from typing import Sequence

from scalesieve.core import transforms as tf
from scalesieve.errors import ScalesieveError
# the parts live beside this module; their names stay importable from here
from scalesieve.stream.choice import SWT_COPIES, not_streamable, stream_bytes  # noqa: F401
from scalesieve.stream.recipe_plan import _Band, _chains, _Plan  # noqa: F401
from scalesieve.stream.sources import (READ_FRAMES, _Source, after_parse,  # noqa: F401
                                       open_source)
from scalesieve.stream.swt_clean import _circle, _clean_swt, _swt_feed, _swt_pass  # noqa: F401
from scalesieve.stream.targets import _AudioTarget, _CsvTarget, _Join, _target  # noqa: F401
from scalesieve.stream.wrap import forward_stream, inverse_stream


def _prepare(input_path: str, outputs: list, *, recipe, transform, edits, force, rate,
             channel, fill_gaps, progress=None, group=None, dataset=None):
    """Every check a clean makes before it reads a sample: ``(src, spec, plan)``."""
    from scalesieve.io.atomic import check_target
    from scalesieve.recipe import check_against

    if len(outputs) == 2 and os.path.realpath(outputs[0]) == os.path.realpath(outputs[1]):
        raise ScalesieveError("-o and --removed name the same file", outputs[0])
    for out in outputs:
        check_target(out, force=force, protect=[input_path])
    src = open_source(input_path, channel, rate, progress, fill_gaps=fill_gaps, group=group,
                      dataset=dataset)
    n = src.frames
    spec = transform or (recipe.transform if recipe is not None else None) or tf.TransformSpec()
    try:
        spec = spec.resolved(n)
    except ValueError as exc:
        raise ScalesieveError(str(exc), input_path) from None
    why = not_streamable({"kind": "audio", "frames_exact": True}, spec, outputs, packets=True)
    if why is not None:
        raise ScalesieveError(why, input_path)
    if spec.kind == "packet" and spec.basis == "best":
        from scalesieve.stream.packet_bands import choose_basis

        # a pass of its own over the file, on the first quarter of the bar
        spec = choose_basis(src, spec, after_parse(src, progress), (0.0, 0.25))
    all_edits = tuple(recipe.edits if recipe is not None else ()) + tuple(edits)
    check_against(all_edits, spec, n / src.rate, src.channels, source=input_path)
    plan = _Plan(all_edits, src.channels, spec, n, src.rate)
    plan.passes_before = int(spec is not None and spec.kind == "packet"
                             and (transform or (recipe.transform if recipe is not None else None)
                                  or tf.TransformSpec()).basis == "best")
    return src, spec, plan


def _thresholds(src: _Source, spec: tf.TransformSpec, plan: _Plan, report) -> int:
    """The first passes: every threshold of the recipe worked out; returns how many passes."""
    n = src.frames
    passes = 0
    while not plan.resolve():
        depth = plan.next_pass()
        if depth == 0:  # pragma: no cover - resolve() always leaves something to gather
            raise AssertionError("a threshold waits for nothing")
        puts = [plan.gatherer(k) for k in range(src.channels)]
        if spec.kind == "swt":
            _swt_pass(src, spec, depth, puts, report, passes)
        elif spec.kind == "packet":
            from scalesieve.stream.packet_clean import packet_pass

            packet_pass(src, spec, depth, puts, report, passes)
        else:
            streams = [forward_stream(src, spec, puts[k], k, depth)
                       for k in range(src.channels)]
            for block in src.blocks():
                for k, s in enumerate(streams):
                    s.feed(block[:, k])
                report(passes, streams[0].fed, "gathering the noise and band figures")
        plan.end_pass()
        passes += 1
    return passes


def _result(src, reports, join, passes, spec, edits=()) -> dict:
    from scalesieve.recipe import Recipe

    return {
        "samples": src.frames,
        "channels": src.channels,
        "rate": src.rate,
        "outputs": reports,
        "clipped": int(sum(r["clipped"] for r in reports)),
        "energy_removed_fraction": join.removed_energy / join.energy if join.energy > 0 else 0.0,
        # a measurement file, or gaps to fill: one pass checks the file first (sources)
        "blocks": {"passes": passes + int(bool(getattr(src, "checked", False))),
                   "frames_per_block": READ_FRAMES,
                   "bytes": stream_bytes(src.channels, spec),
                   # a text table: parsed once in chunks into a temporary file of rows
                   "table_parsed": src.parsed},
        "recipe": Recipe(transform=spec, edits=edits),   # as applied: level resolved
        "warnings": src.warnings(),
    }



def clean_stream(input_path: str, output: str, *, recipe=None,
                 transform: tf.TransformSpec | None = None, edits: Sequence = (),
                 removed: str | None = None, subtype: str | None = None, force: bool = False,
                 rate: float | None = None, channel: int | None = None,
                 fill_gaps: str | None = None, progress=None, group: str | None = None,
                 dataset: str | None = None) -> dict:
    """``scalesieve.batch.clean_file`` block by block: the same arguments and report.

    The report also says ``"blocks": {"passes", "frames_per_block", "bytes"}``:
    how many times the file was read, in blocks of how many frames, and
    about how much memory that took.
    """
    outputs = [output] + ([removed] if removed else [])
    src, spec, plan = _prepare(input_path, outputs, recipe=recipe, transform=transform,
                               edits=edits, force=force, rate=rate, channel=channel,
                               fill_gaps=fill_gaps, progress=progress, group=group,
                               dataset=dataset)
    progress = after_parse(src, progress)
    n = src.frames
    # a threshold rule needs two passes for a median, one for band sums
    expected = 1 + (2 if plan.medians else 0)

    # a best packet basis took the bar's first quarter (_prepare); the passes share the rest
    first, before = (0.25 if plan.passes_before else 0.0), plan.passes_before

    def report(p, fed, text):
        if progress:
            done = min(1.0, (p + fed / n) / max(expected, p + 1))
            progress(first + (1.0 - first) * done, text)

    passes = before + _thresholds(src, spec, plan, report)
    with contextlib.ExitStack() as stack:
        targets = [_target(stack, out, src, n, subtype, force, [input_path])
                   for out in outputs]
        join = _Join(src.channels, targets, removed is not None)
        inverses, forwards = [], []
        for k in range(src.channels if spec.kind == "dwt" else 0):
            bands = plan.bands[k]
            inv = inverse_stream(src, spec, lambda s0, seg, k=k: join.put(k, s0, seg), k, bands)

            def put(key, k0, c, inv=inv, bands=bands):
                inv.put(key, k0, bands[key].edited(c, k0))
            inverses.append(inv)
            forwards.append(forward_stream(src, spec, put, k))
        if spec.kind == "swt":
            _clean_swt(src, spec, plan, join, report, passes - before)
        elif spec.kind == "packet":
            from scalesieve.stream.packet_clean import clean_packet

            clean_packet(src, spec, plan, join, report, passes - before)
        for block in src.blocks() if spec.kind == "dwt" else ():
            join.add_input(block)
            for k in range(src.channels):
                forwards[k].feed(block[:, k])
                inverses[k].pump()
            join.flush()
            report(passes - before, forwards[0].fed, "cleaning")
        passes += 1
        if join.written != n:  # pragma: no cover - the inverse makes every sample
            raise AssertionError(f"made {join.written} of {n} samples")
        reports = [t.finished() for t in targets]
    if progress:
        progress(1.0, "cleaned")
    return _result(src, reports, join, passes, spec, plan.edits)
