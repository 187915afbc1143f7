"""A batch on local processes.

A ``concurrent.futures.ProcessPoolExecutor``.  On Linux the workers are forked
while this process runs a single thread: a fork costs ~0.02 s where 'spawn' or
'forkserver' re-import NumPy and PyWavelets (~0.2-0.3 s each) and a Dask
LocalCluster takes ~0.9 s to start (tests/perf/bench_batch.py measures all
four).  With other threads alive (the window) forking is unsafe, so the
forkserver is used instead.
"""

from __future__ import annotations

import os
import sys
import threading
from collections import deque
from dataclasses import replace
from typing import Callable, Sequence

from scalesieve.batch.jobs import FileJob, _entry, run_job


def default_workers() -> int:
    """The CPUs this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


def _process_context():
    import multiprocessing as mp

    methods = mp.get_all_start_methods()
    if sys.platform.startswith("linux") and "fork" in methods \
            and threading.active_count() == 1:
        return mp.get_context("fork")
    if "forkserver" in methods:
        ctx = mp.get_context("forkserver")
        ctx.set_forkserver_preload(["scalesieve.batch", "scalesieve.api"])
        return ctx
    return mp.get_context("spawn")


_CRASHED = ("the worker process stopped while cleaning this file "
            "(it crashed or ran out of memory)")


def _one_core_each() -> None:
    """Several worker processes: each decomposes in one thread (no more threads than cores)."""
    from scalesieve.core import transforms

    transforms.TRANSFORM_THREADS = 1


def run_local(jobs: Sequence[FileJob], workers: int, on_result: Callable[[dict], None],
              job_fn: Callable[[FileJob], dict] = run_job) -> None:
    """Run ``jobs`` on ``workers`` local processes; call ``on_result`` per entry.

    At most two jobs per worker are queued, so memory stays bounded and, if a
    worker process dies (a crash in a library, the out-of-memory killer), the
    files it may have held are few: each is retried alone in a fresh process,
    and the one that kills it again is reported as failed.
    """
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
    from concurrent.futures.process import BrokenProcessPool

    pending = deque(jobs)
    while pending:
        suspects: list[FileJob] = []
        ctx = _process_context()
        n = max(1, min(workers, len(pending)))
        with ProcessPoolExecutor(n, mp_context=ctx,
                                 initializer=_one_core_each if n > 1 else None) as pool:
            inflight: dict = {}
            try:
                while pending or inflight:
                    while pending and len(inflight) < 2 * n:
                        fut = pool.submit(job_fn, pending[0])  # raises once broken
                        inflight[fut] = pending.popleft()
                    done, _ = wait(list(inflight), return_when=FIRST_COMPLETED)
                    for fut in done:
                        job = inflight.pop(fut)
                        try:
                            res = fut.result()
                        except BrokenProcessPool:
                            suspects.append(job)
                            continue
                        on_result(res)
                    if suspects:
                        raise BrokenProcessPool
            except BrokenProcessPool:
                suspects.extend(inflight.values())
            except BaseException:
                pool.shutdown(wait=True, cancel_futures=True)
                raise
        for job in sorted(suspects, key=lambda j: j.index):
            ctx = _process_context()
            # The job may have written its output before the pool broke; outputs
            # existing before the batch were refused up front (or --force given),
            # so what stands there now is this run's own and may be replaced.
            again = replace(job, options={**job.options, "force": True})
            with ProcessPoolExecutor(1, mp_context=ctx) as lone:
                try:
                    res = lone.submit(job_fn, again).result()
                except BrokenProcessPool:
                    res = _entry(job)
                    res["error"] = f"{job.input}: {_CRASHED}"
            on_result(res)
