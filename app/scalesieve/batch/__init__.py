"""Replay one recipe over many recordings, on local processes or a Dask cluster.

Each file goes through :func:`scalesieve.pipeline.clean_file`, the pipeline
``scalesieve clean`` runs, so every batch output is the file ``clean`` would
write for that input and recipe.

- :mod:`.plan`: which files, which outputs, what is refused before any work;
- :mod:`.jobs`: one file of a batch (a picklable job, its claim, its entry);
- :mod:`.local`: local worker processes;
- :mod:`.cluster`: an existing Dask distributed cluster;
- :mod:`.report`: the report and the versions in it;
- :mod:`.run`: the whole batch.

The command line the window shows is in :mod:`scalesieve.batch_command`.
Every name this package held as one module is importable from here.
"""

from __future__ import annotations

from scalesieve.batch import cluster, jobs, local, plan, report, run
from scalesieve.batch.cluster import check_cluster, connect, run_dask
from scalesieve.batch.jobs import (CLAIM_MARK, FileJob, claim_output, claim_path, run_job,
                                   sha256_file, tidy_outputs)
from scalesieve.batch.local import default_workers, run_local
from scalesieve.batch.plan import (RECORDING_SUFFIXES, REPORT_NAME, check_output_folder,
                                   estimate_output_bytes, expand_inputs, plan_outputs)
from scalesieve.batch.report import versions, write_report
from scalesieve.batch.run import run_batch
from scalesieve.batch_command import batch_command_line, inputs_hint_for, outdir_for
from scalesieve.pipeline import clean_file

__all__ = [
    "CLAIM_MARK", "FileJob", "RECORDING_SUFFIXES", "REPORT_NAME", "batch_command_line",
    "check_cluster", "check_output_folder", "claim_output", "claim_path", "clean_file",
    "connect", "default_workers", "estimate_output_bytes", "expand_inputs", "inputs_hint_for",
    "outdir_for", "plan_outputs", "run_batch", "run_dask", "run_job", "run_local",
    "sha256_file", "tidy_outputs", "versions", "write_report",
    "cluster", "jobs", "local", "plan", "report", "run",
]
