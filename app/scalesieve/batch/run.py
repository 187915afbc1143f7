"""The whole batch: plan, refuse before any work, run locally or on a cluster, report."""

from __future__ import annotations

import os
import time
from typing import Any, Callable, Sequence

from scalesieve.batch import cluster, local
from scalesieve.batch.jobs import FileJob, _entry
from scalesieve.batch.plan import REPORT_NAME, check_output_folder, expand_inputs, plan_outputs
from scalesieve.batch.report import _now, _write_bytes, versions, write_report
from scalesieve.core.transforms import TransformSpec
from scalesieve.errors import ScalesieveError
from scalesieve.recipe import Edit, Recipe


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
        As for :func:`scalesieve.pipeline.clean_file`.
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
        client = cluster.connect(scheduler)
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
            views = cluster.check_cluster(client, scheduler, None if send_data else out_abs,
                                  None if send_data else pairs[0][0])
            info = {"scheduler": scheduler, "workers": len(views),
                    "threads": sum(client.nthreads().values()),
                    "data": "sent through the cluster" if send_data else "shared paths"}
        else:
            n = workers or local.default_workers()
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
            if entry["status"] != "ok":
                entry["output"] = None      # a failed file claims no output
                entry.pop("output_warnings", None)
            entries[i] = entry
            if on_result is not None:
                on_result(entry)

        if on_start is not None:
            on_start(len(jobs))
        interrupted = False
        try:
            if client is not None:
                cluster.run_dask(jobs, client, done, send_data=send_data)
            else:
                local.run_local(jobs, info["local_processes"], done)
        except KeyboardInterrupt:
            interrupted = True
        finally:
            cluster.tidy_everywhere(client, [j.output for j in jobs]
                             + [os.path.join(out_abs, REPORT_NAME)], token, send_data)
        for job, e in zip(jobs, entries):
            if e is None:
                e = _entry(job)
                e.update(output=None, error=f"{job.input}: not run: the batch was interrupted")
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
