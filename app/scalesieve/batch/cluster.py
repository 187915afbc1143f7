"""A batch on an existing Dask distributed cluster.

By default every worker opens the input and writes the output itself, at the
same absolute paths the batch was given: a cluster needs a shared file system
mounted at the same paths on every worker.  With ``send_data=True``
(``--send-data``) the client reads each input, sends its bytes through the
cluster, and writes the returned output bytes itself; the workers then need no
access to the files, at the cost of moving every file over the network twice
(meant for small files).
"""

from __future__ import annotations

import hashlib
import os
from collections import deque
from dataclasses import replace
from typing import Callable, Sequence

from scalesieve import __version__
from scalesieve.batch.jobs import FileJob, _entry, _run_sent, run_job, tidy_outputs
from scalesieve.errors import ScalesieveError


def _worker_view(outdir: str | None, probe: str | None) -> dict:
    """What one cluster worker sees (run there by the preflight check)."""
    return {
        "scalesieve": __version__,
        "outdir": outdir is None or (os.path.isdir(outdir) and os.access(outdir, os.W_OK)),
        "input": probe is None or os.path.exists(probe),
    }


def check_tls(scheduler: str) -> None:
    """A ``tls://`` scheduler needs this client's certificate in Dask's configuration."""
    if not scheduler.startswith("tls://"):
        return
    import dask

    tls = dask.config.get("distributed.comm.tls", default={}) or {}
    client = tls.get("client") or {}
    if not (tls.get("ca-file") and client.get("cert")):
        raise ScalesieveError(
            "a tls:// scheduler needs this machine's certificate in Dask's configuration "
            "(distributed.comm.tls.ca-file, .client.cert and .client.key; see docs/batch.md)",
            scheduler)


def connect(address: str, timeout: float = 10.0):
    """A ``dask.distributed.Client`` for ``address``, or one clear error."""
    try:
        from dask.distributed import Client
    except ImportError:
        raise ScalesieveError(
            "--scheduler needs Dask distributed, which is not installed; install it with "
            "pip install \"scalesieve[cluster]\" (from a source folder: pip install \".[cluster]\")"
        ) from None
    check_tls(address)
    try:
        return Client(address, timeout=timeout, set_as_default=False)
    except (OSError, TimeoutError, ValueError) as exc:
        raise ScalesieveError(f"cannot reach the Dask scheduler: {exc}", address) from None


#: what a batch's workers need to reach its files, or what it can do instead
BATCH_REMEDY = ("the workers need the input and output folders at the same paths (a shared "
                "file system), or use --send-data")


def check_cluster(client, address: str, outdir: str | None, probe_input: str | None,
                  remedy: str = BATCH_REMEDY) -> dict:
    """Refuse before any work when the workers cannot do it; return worker views.

    ``remedy`` ends the message when a worker cannot reach a file.
    """
    try:
        views = client.run(_worker_view, outdir, probe_input)
    except Exception as exc:  # workers without scalesieve fail to unpickle the probe
        raise ScalesieveError(
            f"the cluster's workers cannot run Scalesieve ({type(exc).__name__}: {exc}); "
            f"install scalesieve {__version__} on every worker", address) from None
    if not views:
        raise ScalesieveError("the cluster has no workers", address)
    for worker, v in sorted(views.items()):
        if v["scalesieve"] != __version__:
            raise ScalesieveError(
                f"worker {worker} runs scalesieve {v['scalesieve']}, this is {__version__}; "
                "install the same version everywhere so outputs match", address)
        if not v["outdir"]:
            raise ScalesieveError(
                f"worker {worker} cannot write the output folder {outdir}; {remedy}", address)
        if not v["input"]:
            raise ScalesieveError(
                f"worker {worker} cannot see the input {probe_input}; {remedy}", address)
    return views


def _read_for_sending(job: FileJob) -> FileJob | dict:
    """The job with the input's bytes and hash, or the error entry if it cannot be read."""
    try:
        with open(job.input, "rb") as fh:
            data = fh.read()
    except OSError as exc:
        entry = _entry(job)
        why = {FileNotFoundError: "file not found", IsADirectoryError: "is a folder",
               PermissionError: "permission denied"}.get(type(exc), exc.strerror or str(exc))
        entry["error"] = f"{job.input}: {why}"
        return entry
    return replace(job, data=data, input_sha256=hashlib.sha256(data).hexdigest())


def run_dask(jobs: Sequence[FileJob], client, on_result: Callable[[dict], None],
             send_data: bool = False, window: int | None = None) -> None:
    """Run ``jobs`` on a Dask cluster through ``client``; ``on_result`` per entry.

    Jobs are submitted a window at a time (two per worker thread, at least
    eight); with ``send_data`` each input is read only when its job is
    submitted, so sent data never piles up in the client's memory.
    """
    import uuid

    from dask.distributed import as_completed

    if window is None:
        threads = sum(client.nthreads().values()) or 1
        window = max(8, 2 * threads)
    token = uuid.uuid4().hex[:8]
    pending = deque(jobs)
    by_key: dict = {}

    def submit_next():
        """Submit the next job that can be; report unreadable ones at once."""
        while pending:
            job = pending.popleft()
            key = f"scalesieve-clean-{token}-{job.index}"
            if send_data:
                loaded = _read_for_sending(job)
                if isinstance(loaded, dict):
                    on_result(loaded)
                    continue
                # Scattered data travels once, outside the task graph.
                fut = client.submit(_run_sent, replace(loaded, data=None),
                                    client.scatter(loaded.data), key=key, pure=False)
            else:
                fut = client.submit(run_job, job, key=key, pure=False)
            by_key[fut.key] = job
            return fut
        return None

    seq = as_completed([], loop=client.loop)
    for _ in range(window):
        fut = submit_next()
        if fut is None:
            break
        seq.add(fut)
    try:
        for fut in seq:
            job = by_key.pop(fut.key)
            try:
                res = fut.result()
            except Exception as exc:  # the cluster lost the task (a worker died)
                res = _entry(job)
                res["error"] = f"{job.input}: the cluster could not run it: " \
                               f"{type(exc).__name__}: {exc}"
            fut.release()
            on_result(res)
            nxt = submit_next()
            if nxt is not None:
                seq.add(nxt)
    except BaseException:
        client.cancel(list(seq.futures))
        raise


def tidy_everywhere(client, outputs: list[str], token: str, send_data: bool) -> None:
    """Stale temporaries and claims go at the end of the batch: here and on each worker."""
    if client is not None and not send_data:
        try:
            client.run(tidy_outputs, outputs, None)     # writers on the workers' machines
        except Exception:  # a worker gone meanwhile: what this machine sees is tidied below
            pass
    tidy_outputs(outputs, token)
