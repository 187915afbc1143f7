"""Benchmark: `scalesieve batch` on 2 local workers against `clean` one file after another.

Prints one JSON object.  Everything is measured side by side in one run, on
the same invented files (40 recordings of 1 million samples by default):

* ``clean_one_after_another_s``: ``scalesieve clean`` run on each file in
  turn, one process per file, as a person or a shell loop would;
* ``clean_in_one_process_s``: the same per-file function in a single process
  (no interpreter start-up per file): the strict baseline for the speed-up;
* ``clean_two_halves_at_once_s``: two such processes at the same time, each
  on half the files: what this machine allows 2 workers at best, with no
  batch machinery at all (shared cores and memory bandwidth set it);
* ``batch_s``: ``scalesieve batch --workers 2`` over all the files;
* ``batch_dask_localcluster_s``: the same through ``--scheduler`` on a Dask
  LocalCluster of 2 single-thread worker processes (cluster start excluded);
* ``startup_s``: time to start 2 local workers and run a trivial job, per
  start method, and for a Dask LocalCluster.

The done criterion is ``ratio_vs_clean_one_after_another <= 0.65``.
Every batch output is compared byte for byte with the matching `clean` output.

    python tests/perf/bench_batch.py [--files 40] [--samples 1000000] [--repeat 1]
"""

from __future__ import annotations

import argparse
import filecmp
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time

import numpy as np
import soundfile as sf

RECIPE = {"scalesieve_recipe": 1,
          "transform": {"kind": "dwt", "wavelet": "db4", "level": 10, "mode": "symmetric"},
          "edits": [{"op": "gain", "levels": ["a"], "gain": 0.0},
                    {"op": "threshold", "levels": "details", "rule": "universal",
                     "shape": "soft", "noise": "finest"}]}

IN_ONE_PROCESS = r"""
import sys, json
from scalesieve.batch import clean_file
from scalesieve.recipe import load
recipe = load(sys.argv[1])
outdir = sys.argv[2]
import os
for path in sys.argv[3:]:
    clean_file(path, os.path.join(outdir, os.path.basename(path)), recipe=recipe,
               transform=recipe.transform, force=True)
"""

STARTUP = r"""
import json, os, sys, time, multiprocessing as mp
from concurrent.futures import ProcessPoolExecutor
import scalesieve.batch

def job(_):
    return os.getpid()

if __name__ == "__main__":
    out = {}
    for method in ("fork", "forkserver", "spawn"):
        if method not in mp.get_all_start_methods():
            continue
        ctx = mp.get_context(method)
        if method == "forkserver":
            ctx.set_forkserver_preload(["scalesieve.batch", "scalesieve.api"])
        t = time.perf_counter()
        with ProcessPoolExecutor(2, mp_context=ctx) as ex:
            list(ex.map(job, range(2)))
        out["process_pool_" + method] = round(time.perf_counter() - t, 3)
    from dask.distributed import Client, LocalCluster
    t = time.perf_counter()
    with LocalCluster(n_workers=2, threads_per_worker=1, host="127.0.0.1",
                      dashboard_address=":0") as c, Client(c) as cl:
        cl.gather(cl.map(job, range(2)))
    out["dask_localcluster"] = round(time.perf_counter() - t, 3)
    print(json.dumps(out))
"""

DASK_BATCH = r"""
import sys, time, json
from dask.distributed import LocalCluster
from scalesieve.cli import main

if __name__ == "__main__":
    with LocalCluster(n_workers=2, threads_per_worker=1, host="127.0.0.1",
                      dashboard_address=":0") as c:
        t = time.perf_counter()
        rc = main(["batch", "--scheduler", c.scheduler_address, "--no-progress", *sys.argv[1:]])
        print(json.dumps({"rc": rc, "s": time.perf_counter() - t}))
"""


def _run(cmd: list[str]) -> float:
    t0 = time.perf_counter()
    subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return time.perf_counter() - t0


def _run_together(cmds: list[list[str]]) -> float:
    t0 = time.perf_counter()
    procs = [subprocess.Popen(c, stdout=subprocess.DEVNULL) for c in cmds]
    for p in procs:
        if p.wait() != 0:
            raise RuntimeError(f"{p.args!r} failed")
    return time.perf_counter() - t0


def _clean_one_after_another(files, recipe, outdir) -> float:
    t0 = time.perf_counter()
    for f in files:
        subprocess.run([sys.executable, "-m", "scalesieve", "clean", f, "-o",
                        os.path.join(outdir, os.path.basename(f)), "--recipe", recipe,
                        "--force"], check=True, stdout=subprocess.DEVNULL)
    return time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--files", type=int, default=40)
    ap.add_argument("--samples", type=int, default=1_000_000)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--repeat", type=int, default=1)
    ap.add_argument("--no-dask", action="store_true", help="skip the Dask measurements")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        rng = np.random.default_rng(0)
        n = args.samples
        t = np.arange(n) / 48000.0
        files = []
        # invented accelerometer runs: hum, drift, noise and a few impacts
        for i in range(args.files):
            x = 0.3 * np.sin(2 * np.pi * (50 + i) * t) + 0.05 * rng.standard_normal(n) \
                + 0.2 * t / t[-1]
            x[rng.integers(0, n, 5)] += 0.4
            path = os.path.join(tmp, "in", f"pump_run_{i:03d}.wav")
            os.makedirs(os.path.dirname(path), exist_ok=True)
            sf.write(path, np.clip(x, -1, 1), 48000, subtype="PCM_16")
            files.append(path)
        recipe = os.path.join(tmp, "recipe.json")
        with open(recipe, "w") as fh:
            json.dump(RECIPE, fh)
        # scripts as files: spawned children re-import their __main__ by path
        scripts = {}
        for name, text in (("one_process", IN_ONE_PROCESS), ("startup", STARTUP),
                           ("dask_batch", DASK_BATCH)):
            scripts[name] = os.path.join(tmp, name + ".py")
            with open(scripts[name], "w") as fh:
                fh.write(text)
        one_proc = scripts["one_process"]
        ref_dir = os.path.join(tmp, "ref")
        one_dir = os.path.join(tmp, "one")
        os.makedirs(ref_dir)
        os.makedirs(one_dir)
        seq, inproc, halves, bat, dsk = [], [], [], [], []
        for r in range(args.repeat):
            seq.append(_clean_one_after_another(files, recipe, ref_dir))
            for f in os.listdir(one_dir):
                os.unlink(os.path.join(one_dir, f))
            inproc.append(_run([sys.executable, one_proc, recipe, one_dir, *files]))
            k = len(files) // 2
            halves.append(_run_together([[sys.executable, one_proc, recipe, one_dir, *part]
                                         for part in (files[:k], files[k:])]))
            out = os.path.join(tmp, f"batch{r}")
            bat.append(_run([sys.executable, "-m", "scalesieve", "batch", "--recipe", recipe,
                             "-o", out, "--workers", str(args.workers), "--no-progress",
                             *files]))
            if not args.no_dask:
                dout = os.path.join(tmp, f"dask{r}")
                p = subprocess.run([sys.executable, scripts["dask_batch"], "--recipe", recipe,
                                    "-o", dout, *files], check=True, capture_output=True,
                                   text=True)
                dsk.append(json.loads(p.stdout.strip().splitlines()[-1])["s"])
        names = [os.path.basename(f) for f in files]
        identical = all(filecmp.cmp(os.path.join(ref_dir, nm), os.path.join(tmp, "batch0", nm),
                                    shallow=False) for nm in names)
        if not args.no_dask:
            identical = identical and all(
                filecmp.cmp(os.path.join(ref_dir, nm), os.path.join(tmp, "dask0", nm),
                            shallow=False) for nm in names)
        with open(os.path.join(tmp, "batch0", "batch-report.json")) as fh:
            report = json.load(fh)
        res = {
            "files": args.files, "samples_per_file": n, "workers": args.workers,
            "cpus_available": len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity")
            else os.cpu_count(),
            "clean_one_after_another_s": round(statistics.median(seq), 3),
            "clean_in_one_process_s": round(statistics.median(inproc), 3),
            "batch_s": round(statistics.median(bat), 3),
            "ratio_vs_clean_one_after_another": round(statistics.median(bat) /
                                                      statistics.median(seq), 3),
            "ratio_vs_clean_in_one_process": round(statistics.median(bat) /
                                                   statistics.median(inproc), 3),
            "clean_two_halves_at_once_s": round(statistics.median(halves), 3),
            "machine_ceiling_ratio_two_halves_vs_one_process": round(
                statistics.median(halves) / statistics.median(inproc), 3),
            "batch_vs_two_halves_at_once": round(statistics.median(bat) /
                                                 statistics.median(halves), 3),
            "target_ratio": 0.65,
            "per_file_s_median_in_batch": round(statistics.median(
                e["seconds"] for e in report["files"]), 4),
            "outputs_identical_to_clean": identical,
            "batch_all_ok": report["failed"] == 0,
        }
        if not args.no_dask:
            res["batch_dask_localcluster_s"] = round(statistics.median(dsk), 3)
            res["ratio_dask_vs_clean_one_after_another"] = round(
                statistics.median(dsk) / statistics.median(seq), 3)
            p = subprocess.run([sys.executable, scripts["startup"]], check=True,
                               capture_output=True, text=True)
            res["startup_s"] = json.loads(p.stdout.strip().splitlines()[-1])
        res["meets_target"] = res["ratio_vs_clean_one_after_another"] <= 0.65
        print(json.dumps(res, indent=1))


if __name__ == "__main__":
    main()
