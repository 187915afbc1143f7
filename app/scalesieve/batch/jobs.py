"""One file of a batch: a picklable job, its claim on the output, its report entry.

:func:`run_job` runs :func:`scalesieve.pipeline.clean_file`, the pipeline
``scalesieve clean`` runs, so every batch output is the file ``clean`` would
write for that input and recipe.  It never raises for a bad input: it returns
a report entry instead, so one broken file never stops the others.
"""

from __future__ import annotations

import hashlib
import os
import socket
import tempfile
import time
import traceback
from dataclasses import dataclass, field, replace
from typing import Sequence

from scalesieve.errors import ScalesieveError
from scalesieve.pipeline import clean_file


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


def _output_warnings(job: FileJob, reports: Sequence[dict]) -> list[str]:
    """What ``clean`` warns of its output (``OUT: what``), under the batch's output name.

    Also when the output took another format than the input's name says
    (a measurement file written as WAV).
    """
    from scalesieve.io.writers import output_warnings

    notes = []
    ext_in = os.path.splitext(job.input)[1]
    ext_out = os.path.splitext(job.output)[1]
    if ext_in.lower() != ext_out.lower():
        notes.append(f"{job.output}: written as {ext_out.lstrip('.').upper()} "
                     f"({ext_in or 'this input'} files cannot be written)")
    for rep in reports:     # in send-data mode the writer's path is a private temporary
        notes += output_warnings({**rep, "path": job.output})
    return notes


def run_job(job: FileJob) -> dict:
    """Clean one file of a batch; return its report entry, never raise for bad input.

    The entry has the contract keys (``input``, ``output``, ``status``,
    ``error``, ``input_sha256``, ``samples``, ``rate``, ``seconds``) and
    ``channels``, ``clipped``, ``energy_removed_fraction``, ``warnings`` (the
    reader's), ``output_warnings`` (the writer's, as ``clean`` prints them),
    ``worker``, and ``blocks`` when the file was cleaned block by block (as
    ``scalesieve.api.clean`` reports it).
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
                   energy_removed_fraction=res["energy_removed_fraction"],
                   warnings=list(res.get("warnings", ())),
                   output_warnings=_output_warnings(job, res["outputs"]))
        if res.get("blocks"):
            out["blocks"] = res["blocks"]       # cleaned block by block, and its memory
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


def _run_sent(job: FileJob, data: bytes) -> dict:
    return run_job(replace(job, data=data))


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
