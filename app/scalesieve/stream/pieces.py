"""One long recording cleaned in pieces on several workers, joined into one output.

The recording is cut into time pieces; each worker runs the cascade over
its piece widened by what the filters read on either side (``dwt.stretch``),
applies the recipe with thresholds the first passes found once, and writes
the piece's cleaned samples to a raw temporary file beside the output; the
output is then written from those files in order.  The samples are those of
the one-process run within float round-off.  Workers are local processes
(``workers=N``) or an existing Dask cluster (``scheduler=ADDRESS``), whose
workers must reach the input and the output's folder under the same paths.
"""

from __future__ import annotations

import contextlib
import os
import socket
import tempfile
import time
from typing import Sequence

import numpy as np

from scalesieve.core import transforms as tf
from scalesieve.errors import ScalesieveError
from scalesieve.stream.piece_streams import piece
from scalesieve.stream.pipeline import _prepare, _result, _thresholds
from scalesieve.stream.recipe_plan import _Plan
from scalesieve.stream.sources import READ_FRAMES, open_source, survey_of
from scalesieve.stream.targets import _Join, _target


def clean_piece(job: dict) -> dict:
    """Clean samples ``job["start"] .. job["stop"]`` into the raw float64 file ``job["raw"]``.

    Runs on a worker: it opens the input itself, as the parent opened it (``job["open"]``:
    rate, gap filling, group, dataset, and what the parent's first pass found, so it is
    not made again).  Returns the piece's span, where it ran and how long it took.
    """
    t0 = time.perf_counter()
    src = open_source(job["input"], job["channel"], **job["open"])
    n = src.frames
    spec = job["spec"]
    plan = _Plan(job["edits"], src.channels, spec, n, src.rate)
    for (k, key), lams in job["lams"].items():
        plan.bands[k][key].lams = list(lams)
    o0, o1 = job["start"], job["stop"]
    cleaned = [tf._Carry(o0, np.float64) for _ in range(src.channels)]
    with open(job["raw"], "wb") as fh:
        written = o0

        def emit(k, s0, seg):
            nonlocal written
            cleaned[k].append(seg)
            ready = min(c.hi for c in cleaned)
            if ready > written:
                fh.write(np.stack([c.view(written, ready) for c in cleaned], axis=1).tobytes())
                for c in cleaned:
                    c.drop_below(ready)
                written = ready
        piece(src, spec, plan, o0, o1, emit)
        if written != o1:  # pragma: no cover - the inverse makes every sample of the piece
            raise AssertionError(f"piece {o0}..{o1} made {written - o0} samples")
    return {"start": o0, "stop": o1, "seconds": round(time.perf_counter() - t0, 3),
            "host": socket.gethostname(), "pid": os.getpid()}


#: the shortest piece worth a worker: one block of samples read
MIN_PIECE = READ_FRAMES


def cut(n: int, pieces: int) -> list[tuple[int, int]]:
    """``pieces`` spans of about equal length covering 0 .. n (none shorter than MIN_PIECE)."""
    pieces = max(1, min(pieces, n // MIN_PIECE or 1))
    bounds = [round(n * i / pieces) for i in range(pieces + 1)]
    return list(zip(bounds[:-1], bounds[1:]))


def _run_local(jobs: list[dict], workers: int, input_path: str) -> list[dict]:
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor
    from concurrent.futures.process import BrokenProcessPool

    # spawned, not forked: the caller may hold threads (a progress bar, a pool)
    try:
        with ProcessPoolExecutor(workers,
                                 mp_context=multiprocessing.get_context("spawn")) as pool:
            return list(pool.map(clean_piece, jobs))
    except BrokenProcessPool:
        raise ScalesieveError("a worker process stopped before its piece was cleaned (killed, "
                              "or out of memory); nothing was written", input_path) from None


def _open_cluster(scheduler: str, input_path: str, output: str):
    """A client of the cluster whose workers can reach the input and the output's folder."""
    from scalesieve.batch import connect
    from scalesieve.batch.cluster import check_cluster

    client = connect(scheduler)        # refuses a tls:// address without a certificate
    try:
        check_cluster(client, scheduler, os.path.dirname(os.path.abspath(output)),
                      os.path.abspath(input_path),
                      remedy="the workers need the input and the output's folder at the same "
                             "paths (a shared file system)")
    except BaseException:
        client.close()
        raise
    return client


def _run_dask(jobs: list[dict], client, scheduler: str) -> list[dict]:
    futures = [client.submit(clean_piece, job, pure=False) for job in jobs]
    try:
        return client.gather(futures)
    except ScalesieveError:
        raise                          # a worker's own clear message (an unreadable input)
    except Exception as exc:           # the cluster lost a piece (its workers kept dying)
        client.cancel(futures)
        raise ScalesieveError(f"the cluster could not clean every piece ({type(exc).__name__}: "
                              f"{exc}); nothing was written", scheduler) from None


def _raw_name(output: str, i: int) -> str:
    """An empty file beside ``output`` for piece i, named as ``io.atomic`` names temporaries
    (pid and host of this process), so a later write of ``output`` removes what a killed
    run left."""
    from scalesieve.io.atomic import _host_tag, _temp_prefix

    folder, prefix, suffix = _temp_prefix(output)
    fd, path = tempfile.mkstemp(dir=folder, suffix=suffix,
                                prefix=f"{prefix}{os.getpid()}.{_host_tag()}-piece{i}-")
    os.close(fd)
    return path


def clean_pieces(input_path: str, output: str, *, workers: int | None = None,
                 scheduler: str | None = None, pieces: int | None = None, recipe=None,
                 transform: tf.TransformSpec | None = None, edits: Sequence = (),
                 removed: str | None = None, subtype: str | None = None, force: bool = False,
                 rate: float | None = None, channel: int | None = None,
                 fill_gaps: str | None = None, progress=None, group: str | None = None,
                 dataset: str | None = None) -> dict:
    """``pipeline.clean_stream`` with the cleaning shared out in time pieces.

    ``pieces`` defaults to the number of workers (local), or twice the
    cluster's worker threads.  The report also lists ``"pieces"``: each
    piece's ``start``, ``stop`` (samples), ``seconds``, ``host`` and ``pid``.
    """
    outputs = [output] + ([removed] if removed else [])
    src, spec, plan = _prepare(input_path, outputs, recipe=recipe, transform=transform,
                               edits=edits, force=force, rate=rate, channel=channel,
                               fill_gaps=fill_gaps, group=group, dataset=dataset)
    opened = {"rate": rate, "fill_gaps": fill_gaps, "group": group, "dataset": dataset,
              "survey": survey_of(src)}
    n = src.frames
    # the cluster first: one that cannot do the work is refused before the first passes
    client = _open_cluster(scheduler, input_path, output) if scheduler else None
    try:
        if pieces is None:
            pieces = (workers or 2) if client is None else \
                2 * max(1, sum(client.nthreads().values()))
        return _clean_pieces(src, spec, plan, input_path, outputs, client, scheduler,
                             workers or 2, pieces, subtype, force, progress, opened)
    finally:
        if client is not None:
            client.close()


def _clean_pieces(src, spec, plan, input_path, outputs, client, scheduler, workers, pieces,
                  subtype, force, progress, opened) -> dict:
    n = src.frames

    def report(p, fed, text):
        if progress:
            progress(min(1.0, 0.3 * (p + fed / n) / 3), text)

    passes = _thresholds(src, spec, plan, report)
    lams = {(k, key): tuple(band.lams) for k, bands in enumerate(plan.bands)
            for key, band in bands.items() if band.lams}
    spans = cut(n, pieces)
    raws = []
    try:
        raws.extend(_raw_name(outputs[0], i) for i in range(len(spans)))
        jobs = [{"input": os.path.abspath(input_path), "channel": src.pick, "spec": spec,
                 "edits": plan.edits, "lams": lams, "start": a, "stop": b, "raw": raw,
                 "open": opened}
                for (a, b), raw in zip(spans, raws)]
        if progress:
            progress(0.3, f"cleaning {len(jobs)} pieces")
        t0 = time.perf_counter()
        done = _run_dask(jobs, client, scheduler) if client is not None else \
            _run_local(jobs, workers, input_path)
        spent = time.perf_counter() - t0
        with contextlib.ExitStack() as stack:
            targets = [_target(stack, out, src, n, subtype, force, [input_path])
                       for out in outputs]
            join = _Join(src.channels, targets, len(outputs) == 2)
            pieces_in = _raw_blocks(raws, spans, src.channels)
            fed = have = 0
            for block in src.blocks():
                join.add_input(block)
                fed += block.shape[0]
                while have < fed:
                    cleaned = next(pieces_in)
                    for k in range(src.channels):
                        join.put(k, 0, cleaned[:, k])
                    have += cleaned.shape[0]
                join.flush()
            reports = [t.finished() for t in targets]
    finally:
        for path in raws:
            with contextlib.suppress(OSError):
                os.unlink(path)
    if progress:
        progress(1.0, "cleaned")
    res = _result(src, reports, join, passes + 1, spec, plan.edits)
    res["pieces"] = sorted(done, key=lambda p: p["start"])
    res["pieces_seconds"] = round(spent, 3)
    res["where"] = scheduler or f"{workers} local processes"
    return res


def _raw_blocks(raws: list[str], spans: list, channels: int):
    """The pieces' cleaned samples, in order, in blocks of at most READ_FRAMES frames."""
    for path, (a, b) in zip(raws, spans):
        size = os.path.getsize(path)
        if size != (b - a) * channels * 8:
            raise ScalesieveError(f"a worker left {size} bytes for samples {a} .. {b}; "
                                  "the piece is incomplete", path)
        # plain reads, not a memory map: mapped pages would count against the budget
        with open(path, "rb") as fh:
            for s in range(0, b - a, READ_FRAMES):
                m = min(READ_FRAMES, b - a - s)
                yield np.fromfile(fh, dtype=np.float64, count=m * channels).reshape(m, channels)
