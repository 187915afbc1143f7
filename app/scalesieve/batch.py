"""Replay one recipe over many recordings, on local processes or a Dask cluster.

The per-file work is :func:`clean_file`, the same function ``scalesieve clean``
calls, so every batch output is the file ``clean`` would write for that input
and recipe.  :func:`run_job` wraps it for one file of a batch: it never raises
for a bad input, it returns a report entry instead, so one broken file never
stops the others.

How the data reaches the workers
--------------------------------
By default every worker opens the input and writes the output itself, at the
same absolute paths the batch was given: local processes share this machine's
files, and a cluster needs a shared file system mounted at the same paths on
every worker.  With ``send_data=True`` (``--send-data``) the client reads each
input, sends its bytes through the cluster, and writes the returned output
bytes itself; the workers then need no access to the files, at the cost of
moving every file over the network twice (meant for small files).

Local processes
---------------
A ``concurrent.futures.ProcessPoolExecutor``.  On Linux the workers are forked
while this process runs a single thread: a fork costs ~0.02 s where 'spawn' or
'forkserver' re-import NumPy and PyWavelets (~0.2-0.3 s each) and a Dask
LocalCluster takes ~0.9 s to start (tests/perf/bench_batch.py measures all
four).  With other threads alive (the window) forking is unsafe, so the
forkserver is used instead.
"""

from __future__ import annotations

import datetime
import glob
import hashlib
import os
import platform
import re
import shlex
import socket
import sys
import tempfile
import threading
import time
import traceback
from collections import deque
from dataclasses import dataclass, field, replace
from typing import Any, Callable, Sequence

from scalesieve import __version__
from scalesieve.core.transforms import TransformSpec
from scalesieve.errors import ScalesieveError
from scalesieve.recipe import Edit, Recipe

REPORT_NAME = "batch-report.json"
#: what a folder given as INPUT contributes (not recursive)
RECORDING_SUFFIXES = (".wav", ".flac", ".aiff", ".aif", ".ogg", ".csv", ".tsv", ".txt")
_GLOB_CHARS = set("*?[")


# --------------------------------------------------------------------------
# one file: shared with `scalesieve clean`


def clean_file(input_path: str, output: str, *, recipe: Recipe | None = None,
               transform: TransformSpec | None = None, edits: Sequence[Edit] = (),
               removed: str | None = None, subtype: str | None = None, force: bool = False,
               rate: float | None = None, channel: int | str | None = None,
               fill_gaps: str | None = None, progress=None, group: str | None = None,
               dataset: str | None = None) -> dict:
    """Read ``input_path``, apply the recipe and edits, write the cleaned signal.

    This is the body of ``scalesieve clean``; the batch calls it for every
    file, so both write identical files.

    Parameters
    ----------
    input_path, output : str
        The recording (never overwritten) and the cleaned file to write; the
        format follows the extension.
    recipe : Recipe, optional
        Its edits apply first, then ``edits``.
    transform : TransformSpec, optional
        The transform to use (already merged: defaults, recipe, options);
        ``None`` takes the recipe's own, else the defaults.
    removed : str, optional
        Also write what was removed here.
    subtype, force, rate, channel, fill_gaps
        As the command-line options of the same names.
    progress : callable(fraction, text), optional
        Told how far the decomposition has got (the command line's bar).

    Returns
    -------
    dict
        ``samples``, ``channels``, ``rate``, ``outputs`` (the writers'
        reports, cleaned first), ``clipped`` (total samples clipped by
        integer-PCM export) and ``energy_removed_fraction`` (removed energy
        over the input's, all channels pooled).

    Raises
    ------
    ScalesieveError
        For a target that may not be written, unreadable input, or a recipe
        that does not fit the recording.
    """
    from scalesieve import api, memory_guard

    outputs = [output] + ([removed] if removed else [])
    facts = memory_guard.probe_quietly(input_path)
    spec = transform or (recipe.transform if recipe is not None else None)
    if memory_guard.in_blocks(facts, channel=channel, transform=spec, outputs=outputs,
                              fill_gaps=fill_gaps)[0]:
        # longer than the budget: the same numbers, block by block
        from scalesieve.stream.pipeline import clean_stream

        return clean_stream(input_path, output, recipe=recipe, transform=transform,
                            edits=edits, removed=removed, subtype=subtype, force=force,
                            rate=rate, channel=channel, fill_gaps=fill_gaps, progress=progress)
    if len(outputs) == 2 and os.path.realpath(outputs[0]) == os.path.realpath(outputs[1]):
        raise ScalesieveError("-o and --removed name the same file", output)
    for out in outputs:
        api.check_target(out, force, [input_path])
    rec = api.load(input_path, rate=rate, channel=channel, fill_gaps=fill_gaps, group=group,
                   dataset=dataset)
    model = api.build_model(rec, recipe, transform=transform, edits=tuple(edits),
                            progress=progress)
    if removed:
        reports = _export_both(api, model, output, removed, subtype, force, input_path)
    else:
        reports = [api.export(model, output, "cleaned", subtype=subtype, force=force,
                              protect=[input_path])]
    # Pooled over channels: only the two energies the summary needs, in blocked
    # passes over each channel (no full-length temporaries).
    from scalesieve.core.band_figures import signal_energy
    from scalesieve.core.metrics import removed_energy as energy_of_difference

    x = rec.samples
    removed_energy = sum(energy_of_difference(x[:, k], model.cleaned(k))
                         for k in range(rec.channels))
    total = sum(signal_energy(x[:, k]) for k in range(rec.channels))
    return {
        "samples": rec.n,
        "channels": rec.channels,
        "rate": rec.rate,
        "outputs": reports,
        "clipped": int(sum(int(r.get("clipped") or 0) for r in reports)),
        "energy_removed_fraction": removed_energy / total if total > 0 else 0.0,
        "recipe": model.recipe(),          # as applied: level and basis resolved
        "warnings": list(rec.warnings),
    }


def _export_both(api, model, output: str, removed: str, subtype, force: bool,
                 input_path: str) -> list[dict]:
    """Cleaned and removed signals: both files appear, or neither (a full disk mid-way)."""
    from scalesieve.io.atomic import atomic_targets

    with atomic_targets([output, removed], force=force, protect=[input_path]) as temps:
        reports = []
        for what, tmp, target in (("cleaned", temps[0], output), ("removed", temps[1], removed)):
            try:
                rep = api.export(model, tmp, what, subtype=subtype, force=True,
                                 protect=[input_path])
            except ScalesieveError as exc:
                # The user knows the target, not our temporary name for it.
                exc.message = exc.message.replace(tmp, target)
                if exc.source == tmp:
                    exc.source = target
                raise
            reports.append({**rep, "path": target})
    return reports


# --------------------------------------------------------------------------
# one file of a batch


@dataclass(frozen=True)
class FileJob:
    """One input of a batch; picklable, so it travels to processes and clusters.

    ``options`` are keyword arguments of :func:`clean_file`.  ``data`` holds
    the input's bytes when they are sent through the cluster.
    """

    index: int
    input: str
    output: str
    options: dict = field(default_factory=dict)
    data: bytes | None = None
    input_sha256: str | None = None
    #: the batch's token: marks outputs this batch's tries began (see :func:`claim_output`)
    batch: str | None = None


def sha256_file(path: str, block: int = 1 << 20) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        while True:
            chunk = fh.read(block)
            if not chunk:
                return h.hexdigest()
            h.update(chunk)


#: ``.<output name>.scalesieve-claim-<batch token>``: an empty file beside an output
CLAIM_MARK = ".scalesieve-claim-"


def claim_path(output: str, token: str) -> str:
    folder, name = os.path.split(output)
    return os.path.join(folder, f".{name}{CLAIM_MARK}{token}")


def claim_output(job: FileJob) -> dict:
    """The options for this try of ``job``: an earlier try's own output may be replaced.

    A try leaves a claim beside the output before it writes it (when the
    output is not there yet).  A later try of the same job in the same batch
    (a retry after its worker died, on any runner) finds the claim, so an
    output standing there now is that earlier try's and is replaced; an output
    that was there before the first try is refused as ever (unless ``force``).
    The batch removes its claims at the end.
    """
    if job.batch is None or job.options.get("force"):
        return job.options
    claim = claim_path(job.output, job.batch)
    if os.path.lexists(claim):
        return {**job.options, "force": True}
    if not os.path.lexists(job.output):
        try:
            with open(claim, "x"):
                pass
        except OSError:
            pass    # the write itself will say what is wrong with the folder
    return job.options


def _entry(job: FileJob) -> dict:
    return {"input": job.input, "output": job.output, "status": "error", "error": None,
            "input_sha256": job.input_sha256, "samples": None, "rate": None, "seconds": None}


def run_job(job: FileJob) -> dict:
    """Clean one file of a batch; return its report entry, never raise for bad input.

    The entry has the contract keys (``input``, ``output``, ``status``,
    ``error``, ``input_sha256``, ``samples``, ``rate``, ``seconds``) and
    ``channels``, ``clipped``, ``energy_removed_fraction`` and ``worker``.
    In send-data mode the cleaned file's bytes come back as ``output_data``.
    """
    t0 = time.perf_counter()
    out = _entry(job)
    out["worker"] = f"{socket.gethostname()}:{os.getpid()}"
    tmp_dir = None
    try:
        if job.data is None:
            try:
                out["input_sha256"] = sha256_file(job.input)
            except OSError:
                pass  # the reader names the problem (missing, a folder, no permission)
            res = clean_file(job.input, job.output, **claim_output(job))
        else:
            # The bytes go to a private folder under the input's own name, so
            # the writers see what they would see for the original file.
            tmp_dir = tempfile.mkdtemp(prefix="scalesieve-batch-")
            name = os.path.basename(job.input)
            src = os.path.join(tmp_dir, "in", name)
            dst = os.path.join(tmp_dir, "out", os.path.basename(job.output))
            os.makedirs(os.path.dirname(src))
            os.makedirs(os.path.dirname(dst))
            with open(src, "wb") as fh:
                fh.write(job.data)
            try:
                res = clean_file(src, dst, **{**job.options, "force": False})
            except ScalesieveError as exc:
                exc.message = exc.message.replace(src, job.input).replace(dst, job.output)
                if exc.source == src:
                    exc.source = job.input
                elif exc.source == dst:
                    exc.source = job.output
                raise
            with open(dst, "rb") as fh:
                out["output_data"] = fh.read()
        out.update(status="ok", samples=res["samples"], rate=res["rate"],
                   channels=res["channels"], clipped=res["clipped"],
                   energy_removed_fraction=res["energy_removed_fraction"])
    except ScalesieveError as exc:
        out["error"] = exc.one_line()
    except MemoryError:
        out["error"] = f"{job.input}: not enough memory for this recording"
    except Exception as exc:  # one bad file must not stop the batch: record it
        out["error"] = f"{job.input}: unexpected failure: {type(exc).__name__}: {exc}"
        out["details"] = traceback.format_exc()
    finally:
        if tmp_dir is not None:
            import shutil

            shutil.rmtree(tmp_dir, ignore_errors=True)
    out["seconds"] = round(time.perf_counter() - t0, 4)
    return out


# --------------------------------------------------------------------------
# planning: which files, which outputs, refused before any work


def expand_inputs(inputs: Sequence[str]) -> list[str]:
    """Inputs as given, with folders and unexpanded patterns opened up.

    A folder contributes its recordings (by suffix, not recursive, hidden
    files skipped); a name with ``*``, ``?`` or ``[`` that is not a file
    itself is expanded as a pattern (shells such as Windows cmd leave them).
    """
    out: list[str] = []
    for item in inputs:
        if os.path.isdir(item):
            names = sorted(n for n in os.listdir(item)
                           if not n.startswith(".") and n != REPORT_NAME
                           and os.path.splitext(n)[1].lower() in RECORDING_SUFFIXES
                           and os.path.isfile(os.path.join(item, n)))
            if not names:
                raise ScalesieveError("folder holds no recordings (" +
                                      " ".join(RECORDING_SUFFIXES) + ")", item)
            out.extend(os.path.join(item, n) for n in names)
        elif not os.path.lexists(item) and _GLOB_CHARS & set(item):
            found = sorted(glob.glob(item))
            if not found:
                raise ScalesieveError("no file matches this pattern", item)
            out.extend(found)
        else:
            out.append(item)
    return out


def plan_outputs(inputs: Sequence[str], outdir: str, force: bool = False) -> list[tuple[str, str]]:
    """Pair every input with OUTDIR/<its name>; refuse clashes before any work.

    Returns absolute ``(input, output)`` pairs in the order given.

    Raises
    ------
    ScalesieveError
        No inputs; two inputs sharing a name (compared without case, since
        such names clash on Windows and macOS); an input named like the
        report; an output that is an input; existing outputs without
        ``force``; OUTDIR being a file.
    """
    if not inputs:
        raise ScalesieveError("no input files given")
    if os.path.exists(outdir) and not os.path.isdir(outdir):
        raise ScalesieveError("is a file; -o names the output folder", outdir)
    out_abs = os.path.abspath(outdir)
    seen: dict[str, str] = {}
    pairs = []
    for item in inputs:
        src = os.path.abspath(item)
        name = os.path.basename(src)
        if not name:
            raise ScalesieveError("is not a file name", item)
        key = name.casefold()
        if key == REPORT_NAME:
            raise ScalesieveError(f"an input may not be named {REPORT_NAME} "
                                  "(the batch writes its report under that name)", item)
        if key in seen:
            raise ScalesieveError(
                f"shares its name with {seen[key]}; both would be written to "
                f"{os.path.join(out_abs, name)} (rename one or run two batches)", item)
        seen[key] = item
        pairs.append((src, os.path.join(out_abs, name)))
    existing = []
    for src, dst in pairs:
        if os.path.exists(src) and os.path.exists(dst) and os.path.samefile(src, dst):
            raise ScalesieveError("is an input file; it is never overwritten "
                                  "(choose another output folder)", dst)
        if os.path.lexists(dst) and not force:
            existing.append(dst)
    report = os.path.join(out_abs, REPORT_NAME)
    if os.path.lexists(report) and not force:
        existing.append(report)
    if existing:
        more = f" (and {len(existing) - 1} more)" if len(existing) > 1 else ""
        raise ScalesieveError(f"exists{more}; use --force to replace", existing[0])
    return pairs


def estimate_output_bytes(src: str, dst: str, subtype: str | None = None) -> int:
    """About how many bytes the cleaned ``dst`` of ``src`` takes (for the free-space check).

    Uncompressed audio from an audio input: frames x channels x bytes per
    sample (the subtype asked for, else the input's, else 32-bit float),
    which is what the writer writes.  Everything else (compressed formats,
    text tables) is rougher: the input's own size, or for a CSV output from
    audio, 25 characters a value.
    """
    from scalesieve.io.writers import _BYTES_PER_SAMPLE, CSV_EXTENSIONS

    try:
        size = os.path.getsize(src)
    except OSError:
        return 0            # the job will name the problem
    ext = os.path.splitext(dst)[1].lower()
    try:
        import soundfile as sf

        info = sf.info(src)
    except Exception:       # not audio (a text table), or unreadable: the input's size
        return size
    if ext in CSV_EXTENSIONS:
        return int(info.frames) * (int(info.channels) + 1) * 25
    if ext in (".flac", ".ogg", ".oga"):
        return size
    width = _BYTES_PER_SAMPLE.get((subtype or info.subtype or "FLOAT").upper(), 4)
    return int(info.frames) * int(info.channels) * width + 4096


def check_output_folder(outdir: str, pairs: Sequence[tuple[str, str]],
                        subtype: str | None = None) -> None:
    """Refuse, before any work, an output folder that cannot take the batch's outputs.

    A file is made there and removed (permissions, read-only file systems and
    full disks all show), and the free space is compared with
    :func:`estimate_output_bytes` summed over the inputs (less what the
    outputs being replaced free, plus room for the report).

    Raises
    ------
    ScalesieveError
        One line naming the folder and what is wrong.
    """
    import errno
    import shutil

    try:
        fd, probe = tempfile.mkstemp(prefix=".scalesieve-probe-", dir=outdir)
        os.close(fd)
        os.unlink(probe)
    except OSError as exc:
        why = {errno.ENOSPC: "no disk space left", errno.EACCES: "permission denied",
               errno.EPERM: "permission denied", errno.EROFS: "read-only file system",
               errno.EDQUOT: "disk quota exceeded"}.get(exc.errno, exc.strerror or str(exc))
        raise ScalesieveError(f"cannot write in the output folder ({why}); nothing was "
                              "cleaned", outdir) from None
    need = 1 << 20          # the report, and slack for headers
    for src, dst in pairs:
        need += estimate_output_bytes(src, dst, subtype)
        try:
            need -= os.path.getsize(dst)        # replaced with --force: its room comes back
        except OSError:
            pass
    try:
        free = shutil.disk_usage(outdir).free
    except OSError:
        return
    if free < need:
        raise ScalesieveError(
            f"not enough disk space for the outputs: about {need / 1e6:.3g} MB needed, "
            f"{free / 1e6:.3g} MB free; nothing was cleaned", outdir)


def tidy_outputs(outputs: Sequence[str], token: str | None = None) -> list[str]:
    """Remove this batch's claims and the temporaries dead writers left beside its outputs.

    Run at the end of a batch (here, and on every cluster worker for the
    writers of its own machine).  Returns what was removed.
    """
    from scalesieve.io.atomic import remove_stale_temporaries

    removed: list[str] = []
    for out in outputs:
        removed += remove_stale_temporaries(out)
        if token:
            claim = claim_path(out, token)
            try:
                os.unlink(claim)
            except OSError:
                continue
            removed.append(claim)
    return removed


# --------------------------------------------------------------------------
# runners


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


def _worker_view(outdir: str | None, probe: str | None) -> dict:
    """What one cluster worker sees (run there by the preflight check)."""
    return {
        "scalesieve": __version__,
        "outdir": outdir is None or (os.path.isdir(outdir) and os.access(outdir, os.W_OK)),
        "input": probe is None or os.path.exists(probe),
    }


def connect(address: str, timeout: float = 10.0):
    """A ``dask.distributed.Client`` for ``address``, or one clear error."""
    try:
        from dask.distributed import Client
    except ImportError:
        raise ScalesieveError(
            "--scheduler needs Dask distributed, which is not installed; install it with "
            "pip install \"scalesieve[cluster]\" (from a source folder: pip install \".[cluster]\")"
        ) from None
    try:
        return Client(address, timeout=timeout, set_as_default=False)
    except (OSError, TimeoutError, ValueError) as exc:
        raise ScalesieveError(f"cannot reach the Dask scheduler: {exc}", address) from None


def check_cluster(client, address: str, outdir: str | None, probe_input: str | None) -> dict:
    """Refuse before any work when the workers cannot do it; return worker views."""
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
                f"worker {worker} cannot write the output folder {outdir}; the workers need "
                "the input and output folders at the same paths (a shared file system), "
                "or use --send-data", address)
        if not v["input"]:
            raise ScalesieveError(
                f"worker {worker} cannot see the input {probe_input}; the workers need the "
                "input and output folders at the same paths (a shared file system), "
                "or use --send-data", address)
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


def _run_sent(job: FileJob, data: bytes) -> dict:
    return run_job(replace(job, data=data))


# --------------------------------------------------------------------------
# the whole batch


def versions(cluster: bool = False) -> dict:
    """Versions that decide the numbers, for the report."""
    import numpy
    import pywt

    v = {"scalesieve": __version__, "python": platform.python_version(),
         "numpy": numpy.__version__, "pywavelets": pywt.__version__,
         "platform": platform.platform()}
    try:
        import soundfile

        v["soundfile"] = soundfile.__version__
        v["libsndfile"] = soundfile.__libsndfile_version__
    except (ImportError, OSError, AttributeError):
        pass
    if cluster:
        import dask
        import distributed

        v["dask"] = dask.__version__
        v["distributed"] = distributed.__version__
    return v


def _now() -> str:
    return datetime.datetime.now(datetime.timezone.utc).astimezone().isoformat(timespec="seconds")


def run_batch(inputs: Sequence[str], outdir: str, recipe: Recipe | None = None, *,
              transform: TransformSpec | None = None, edits: Sequence[Edit] = (),
              workers: int | None = None, scheduler: str | None = None,
              send_data: bool = False, force: bool = False, subtype: str | None = None,
              rate: float | None = None, channel: int | str | None = None,
              fill_gaps: str | None = None, on_start: Callable[[int], None] | None = None,
              on_result: Callable[[dict], None] | None = None,
              recipe_file: str | None = None, group: str | None = None,
              dataset: str | None = None) -> dict:
    """Clean every input with one recipe into ``outdir``; write and return the report.

    Everything that can be refused is refused before any file is read (see
    :func:`plan_outputs`); after that a failing input is recorded in the
    report and the others go on.  ``outdir`` is created when missing.

    Parameters
    ----------
    inputs : sequence of str
        Recordings, folders of recordings, or patterns (see :func:`expand_inputs`).
    outdir : str
        Gets ``<input name>`` per input and ``batch-report.json``.
    recipe, transform, edits, force, subtype, rate, channel, fill_gaps, group, dataset
        As for :func:`clean_file`.
    workers : int, optional
        Local processes (default: the CPUs available).
    scheduler : str, optional
        A Dask scheduler address such as ``tcp://10.0.0.5:8786``; then
        ``workers`` is ignored.
    send_data : bool
        With ``scheduler``: send file bytes through the cluster instead of
        relying on shared paths.
    on_start : callable(count), optional
        Told how many files will run, once every check has passed.
    on_result : callable(entry), optional
        Told of each finished file (progress bars).

    Returns
    -------
    dict
        The report as written to ``outdir/batch-report.json``.
    """
    from scalesieve.io.atomic import atomic_write

    if send_data and scheduler is None:
        raise ScalesieveError("--send-data only applies with --scheduler")
    if workers is not None and workers < 1:
        raise ScalesieveError("--workers must be at least 1")
    pairs = plan_outputs(expand_inputs(inputs), outdir, force)
    spec = transform if transform is not None else (recipe.transform if recipe else None)
    options = {"recipe": recipe, "transform": spec, "edits": tuple(edits), "subtype": subtype,
               "force": force, "rate": rate, "channel": channel, "fill_gaps": fill_gaps,
               "group": group, "dataset": dataset}
    client = None
    if scheduler is not None:
        client = connect(scheduler)
    try:
        out_abs = os.path.abspath(outdir)
        try:
            os.makedirs(out_abs, exist_ok=True)
        except OSError as exc:
            raise ScalesieveError(f"cannot create the output folder: {exc.strerror or exc}",
                                  outdir) from None
        check_output_folder(out_abs, pairs, subtype)
        info: dict[str, Any] = {}
        if client is not None:
            views = check_cluster(client, scheduler, None if send_data else out_abs,
                                  None if send_data else pairs[0][0])
            info = {"scheduler": scheduler, "workers": len(views),
                    "threads": sum(client.nthreads().values()),
                    "data": "sent through the cluster" if send_data else "shared paths"}
        else:
            n = workers or default_workers()
            info = {"local_processes": max(1, min(n, len(pairs)))}
        import uuid

        token = uuid.uuid4().hex[:12]
        jobs = [FileJob(i, src, dst, options, batch=token) for i, (src, dst) in enumerate(pairs)]
        entries: list[dict | None] = [None] * len(jobs)
        started = _now()
        t0 = time.perf_counter()

        index_of = {j.output: j.index for j in jobs}

        def done(entry: dict) -> None:
            i = index_of[entry["output"]]
            data = entry.pop("output_data", None)
            if data is not None:
                try:
                    atomic_write(entry["output"], lambda tmp: _write_bytes(tmp, data),
                                 force=force, protect=[entry["input"]])
                except ScalesieveError as exc:
                    entry.update(status="error", error=exc.one_line())
            entries[i] = entry
            if on_result is not None:
                on_result(entry)

        if on_start is not None:
            on_start(len(jobs))
        interrupted = False
        try:
            if client is not None:
                run_dask(jobs, client, done, send_data=send_data)
            else:
                run_local(jobs, info["local_processes"], done)
        except KeyboardInterrupt:
            interrupted = True
        finally:
            _tidy_everywhere(client, [j.output for j in jobs]
                             + [os.path.join(out_abs, REPORT_NAME)], token, send_data)
        for job, e in zip(jobs, entries):
            if e is None:
                e = _entry(job)
                e["error"] = f"{job.input}: not run: the batch was interrupted"
                entries[job.index] = e
        recipe_json = Recipe(spec, tuple(recipe.edits if recipe else ()) + tuple(edits)).to_json()
        report = {
            "recipe": recipe_json,
            "started": started,
            "finished": _now(),
            "versions": versions(cluster=client is not None),
            "files": entries,
            "recipe_file": os.path.abspath(recipe_file) if recipe_file else None,
            "seconds": round(time.perf_counter() - t0, 3),
            "ok": sum(e["status"] == "ok" for e in entries),
            "failed": sum(e["status"] != "ok" for e in entries),
            "run": info,
        }
        write_report(os.path.join(out_abs, REPORT_NAME), report, force=force)
        if interrupted:
            raise KeyboardInterrupt
        return report
    finally:
        if client is not None:
            client.close()


def _tidy_everywhere(client, outputs: list[str], token: str, send_data: bool) -> None:
    """Stale temporaries and claims go at the end of the batch: here and on each worker."""
    if client is not None and not send_data:
        try:
            client.run(tidy_outputs, outputs, None)     # writers on the workers' machines
        except Exception:  # a worker gone meanwhile: what this machine sees is tidied below
            pass
    tidy_outputs(outputs, token)


def _write_bytes(path: str, data: bytes) -> None:
    with open(path, "wb") as fh:
        fh.write(data)


def write_report(path: str, report: dict, force: bool = False) -> None:
    import json

    from scalesieve.io.atomic import atomic_write

    text = json.dumps(report, indent=1, allow_nan=False)
    atomic_write(path, lambda tmp: _write_bytes(tmp, (text + "\n").encode("utf-8")),
                 force=force)


# --------------------------------------------------------------------------
# the command line the window shows


def inputs_hint_for(recording_path: str) -> str:
    """A pattern for "every recording like this one": its folder and suffix."""
    folder = os.path.dirname(os.path.abspath(recording_path))
    suffix = os.path.splitext(recording_path)[1]
    return os.path.join(folder, "*" + suffix)


def outdir_for(recording_path: str) -> str:
    """Where a batch of recordings like this one may go: ``cleaned`` in their folder."""
    return os.path.join(os.path.dirname(os.path.abspath(recording_path)), "cleaned")


def _quote_windows(arg: str) -> str:
    if arg and not any(c in arg for c in ' \t"&|<>^%'):
        return arg
    # Microsoft C runtime rules: backslashes are literal except before a quote.
    body = re.sub(r'(\\*)"', r'\1\1\\"', arg)
    body = re.sub(r'(\\+)$', r'\1\1', body)
    return f'"{body}"'


def batch_command_line(recipe_path: str, inputs_hint: str, outdir: str,
                       workers: int | None = None, *, scheduler: str | None = None,
                       force: bool = False, program: str = "scalesieve",
                       shell: str | None = None) -> str:
    """The ``scalesieve batch`` command that replays a saved recipe, ready to copy.

    Parameters
    ----------
    recipe_path : str
        The exported recipe file.
    inputs_hint : str
        A file, a folder, or a pattern such as ``/data/pump/*.wav``
        (:func:`inputs_hint_for` makes one from the open recording).  On a
        POSIX shell the pattern part stays unquoted so the shell expands it;
        on Windows the whole hint is quoted and ``batch`` expands it itself.
    outdir : str
        The output folder.
    workers : int, optional
        ``--workers N``; left out when ``None`` (all CPUs) or when
        ``scheduler`` is given.
    scheduler : str, optional
        ``--scheduler ADDRESS`` instead of local processes.
    shell : {'posix', 'windows'}, optional
        Quoting rules; default from the platform.

    Examples
    --------
    >>> batch_command_line("/data/r.json", "/data/pump runs/*.wav", "/data/clean", 2,
    ...                    shell="posix")
    "scalesieve batch --recipe /data/r.json -o /data/clean --workers 2 '/data/pump runs'/*.wav"
    """
    shell = shell or ("windows" if os.name == "nt" else "posix")
    quote = shlex.quote if shell == "posix" else _quote_windows
    words = [program, "batch", "--recipe", quote(recipe_path), "-o", quote(outdir)]
    if scheduler:
        words += ["--scheduler", quote(scheduler)]
    elif workers is not None:
        words += ["--workers", str(int(workers))]
    if force:
        words.append("--force")
    folder, base = os.path.split(inputs_hint)
    if shell == "posix" and _GLOB_CHARS & set(base) and not _GLOB_CHARS & set(folder) \
            and all(c.isalnum() or c in "*?[]._-" for c in base):
        words.append((quote(folder.rstrip("/")) + "/" if folder.rstrip("/") else folder) + base)
    else:
        words.append(quote(inputs_hint))
    return " ".join(words)
