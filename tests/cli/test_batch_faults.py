"""Batch faults: workers killed by PID, stale temporaries, folders that cannot take the work.

Real worker processes throughout: the local runner's pool (driven from a
child interpreter, so its workers fork with the patch that makes one writer
stop mid-write), and a Dask ``LocalCluster`` with worker processes, one of
which is killed by PID after it wrote its output.  "Each output equals what
``clean`` writes" (CONTRACT, batch) is checked against ``clean_file`` run here.
The full and read-only disks are small tmpfs mounts (tests/full_disk.py), with
patched twins where mounting is not permitted.
"""

from __future__ import annotations

import errno
import filecmp
import json
import os
import signal
import subprocess
import sys
import textwrap
import threading
import time
import wave

import numpy as np
import pytest

from full_disk import small_disk
from scalesieve import batch
from scalesieve.cli import main
from scalesieve.recipe import Edit

MUTE_D1 = {"scalesieve_recipe": 1,
           "transform": {"kind": "dwt", "wavelet": "db4", "level": 4, "mode": "symmetric"},
           "edits": [{"op": "gain", "levels": [1], "gain": 0.0}]}
NAMES = ("run_00.wav", "run_01.wav", "run_02.wav")


def _wav16(path, seconds, rate=8000, seed=0):
    # written with Python's own wave module: 16-bit PCM, mono
    t = np.arange(int(seconds * rate)) / rate
    x = 0.2 * np.sin(2 * np.pi * 50 * t) + 0.02 * np.random.default_rng(seed).standard_normal(t.size)
    pcm = np.round(x * 32767).astype("<i2")
    with wave.open(str(path), "wb") as w:
        w.setnchannels(1)
        w.setsampwidth(2)
        w.setframerate(rate)
        w.writeframes(pcm.tobytes())


def _inputs(folder, seconds=1.0):
    folder.mkdir(parents=True, exist_ok=True)
    for k, name in enumerate(NAMES):
        _wav16(folder / name, seconds, seed=k)
    recipe = folder.parent / "mute_d1.json"
    recipe.write_text(json.dumps(MUTE_D1))
    return recipe, [str(folder / n) for n in NAMES]


def _ours(folder):
    """Hidden files of ours left in a folder: temporaries, claims, probes."""
    return sorted(n for n in os.listdir(folder) if n.startswith("."))


class _Killer:
    """Kills, by PID, every process that writes its PID into ``folder``."""

    def __init__(self, folder):
        self.folder = str(folder)
        os.makedirs(self.folder, exist_ok=True)
        self.killed: list[int] = []
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def _run(self):
        while not self._stop.is_set():
            for name in os.listdir(self.folder):
                if name.isdigit() and int(name) not in self.killed:
                    pid = int(name)
                    try:
                        os.kill(pid, signal.SIGKILL)
                    except ProcessLookupError:
                        pass
                    self.killed.append(pid)
            time.sleep(0.02)

    def __enter__(self):
        self._thread.start()
        return self

    def __exit__(self, *exc):
        self._stop.set()
        self._thread.join(5)


# ------------------------------------------------ 6: killed mid-write, local runner

_DRIVER = textwrap.dedent("""
    import os, sys, time
    from scalesieve import batch
    from scalesieve.cli import main
    from scalesieve.io.atomic import atomic_write

    VICTIM, PIDS = sys.argv[1], sys.argv[2]
    real = batch.jobs.clean_file

    def clean_file(input_path, output, **kw):
        if os.path.basename(input_path) == VICTIM:
            def write(tmp):
                with open(tmp, "wb") as fh:       # a writer half-way through its file
                    fh.write(b"RIFF" + bytes(5000))
                    fh.flush()
                open(os.path.join(PIDS, str(os.getpid())), "w").close()
                time.sleep(120)                    # until it is killed
            atomic_write(output, write)
        return real(input_path, output, **kw)

    batch.jobs.clean_file = clean_file      # where each job of the batch finds it
    sys.exit(main(sys.argv[3:]))
""")


def test_a_writer_killed_mid_write_leaves_no_temporary_after_the_batch(tmp_path):
    recipe, inputs = _inputs(tmp_path / "in")
    out = tmp_path / "out"
    with _Killer(tmp_path / "pids") as killer:
        done = subprocess.run(
            [sys.executable, "-c", _DRIVER, NAMES[0], killer.folder, "batch", "--recipe",
             str(recipe), "-o", str(out), "--workers", "2", *inputs],
            capture_output=True, text=True, timeout=300)
    assert killer.killed, done.stderr          # the writer really was killed (twice: retried)
    assert done.returncode == 1, done.stderr
    report = json.loads((out / "batch-report.json").read_text())
    status = {os.path.basename(e["input"]): e["status"] for e in report["files"]}
    assert status == {NAMES[0]: "error", NAMES[1]: "ok", NAMES[2]: "ok"}
    assert _ours(out) == []
    assert sorted(os.listdir(out)) == ["batch-report.json", NAMES[1], NAMES[2]]


# ------------------------------------------- 5: Dask worker killed after it wrote

def _die_after_writing(victim: str, pids: str, marker: str) -> None:
    """Run on each cluster worker: the first try of ``victim`` stops after its write."""
    from scalesieve.batch import jobs as b      # where each job of the batch finds it

    real = b.clean_file

    def clean_file(input_path, output, **kw):
        res = real(input_path, output, **kw)
        if os.path.basename(input_path) == victim:
            try:
                with open(marker, "x"):
                    pass
            except FileExistsError:
                return res                      # a later try: carry on
            open(os.path.join(pids, str(os.getpid())), "w").close()
            time.sleep(120)                     # killed by PID before it can report
        return res

    b.clean_file = clean_file


def test_dask_worker_killed_after_writing_its_output_is_not_a_failure(tmp_path):
    pytest.importorskip("dask.distributed")
    import cloudpickle
    from dask.distributed import Client, LocalCluster

    cloudpickle.register_pickle_by_value(sys.modules[__name__])
    recipe, inputs = _inputs(tmp_path / "in")
    ref = tmp_path / "ref"
    ref.mkdir()
    edits = (Edit("gain", levels=(1,), gain=0.0),)
    from scalesieve.core.transforms import TransformSpec

    for src in inputs:
        batch.clean_file(src, str(ref / os.path.basename(src)), edits=edits,
                         transform=TransformSpec("dwt", "db4", 4, "symmetric"))
    out = tmp_path / "out"
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                      dashboard_address=":0") as cluster, \
            Client(cluster.scheduler_address) as client, \
            _Killer(tmp_path / "pids") as killer:
        client.run(_die_after_writing, NAMES[1], killer.folder, str(tmp_path / "tried"))
        from scalesieve.recipe import load

        report = batch.run_batch(inputs, str(out), load(str(recipe)),
                                 scheduler=cluster.scheduler_address)
    assert killer.killed, report
    by_name = {os.path.basename(e["input"]): e for e in report["files"]}
    assert {n: e["status"] for n, e in by_name.items()} == {n: "ok" for n in NAMES}, \
        [e["error"] for e in report["files"]]
    for name in NAMES:
        assert filecmp.cmp(ref / name, out / name, shallow=False), name
    assert _ours(out) == []


def test_a_claim_lets_a_retry_replace_only_its_own_earlier_output(tmp_path):
    recipe, inputs = _inputs(tmp_path / "in", seconds=0.2)
    out = tmp_path / "out"
    out.mkdir()
    job = batch.FileJob(0, inputs[0], str(out / NAMES[0]),
                        {"edits": (Edit("gain", levels=(1,), gain=0.0),)}, batch="t0k3n")
    assert batch.run_job(job)["status"] == "ok"
    again = batch.run_job(job)                    # the same job tried again: its own output
    assert again["status"] == "ok", again["error"]
    other = batch.FileJob(1, inputs[1], str(out / NAMES[1]), job.options, batch="t0k3n")
    (out / NAMES[1]).write_bytes(b"someone else's file")
    refused = batch.run_job(other)                # there before this batch's first try
    assert refused["status"] == "error" and "exists" in refused["error"]
    assert (out / NAMES[1]).read_bytes() == b"someone else's file"
    batch.tidy_outputs([job.output, other.output], "t0k3n")
    assert _ours(out) == []


# ------------------------------------------ 7: folders that cannot take the work

def _assert_refused_before_work(code, err, out, words):
    lines = err.strip().splitlines()
    assert code == 2 and len(lines) == 1, err
    assert lines[0].startswith("scalesieve: error: ") and words in lines[0], lines[0]
    assert not os.path.exists(os.path.join(out, "batch-report.json"))
    assert [n for n in os.listdir(out) if not n.startswith(".")] == []


def test_read_only_output_folder_is_refused_before_any_work(tmp_path, capsys, monkeypatch):
    recipe, inputs = _inputs(tmp_path / "in")
    cleaned = []
    monkeypatch.setattr(batch.local, "run_local", lambda jobs, *a, **k: cleaned.extend(jobs))
    with small_disk(tmp_path, 1 << 20, read_only=True) as disk:
        code = main(["batch", "--recipe", str(recipe), "-o", disk, *inputs])
        _assert_refused_before_work(code, capsys.readouterr().err, disk, "read-only")
    assert cleaned == []


def test_unwritable_output_folder_twin(tmp_path, capsys, monkeypatch):
    # Twin where mounting is not permitted: making a file there fails with EACCES.
    recipe, inputs = _inputs(tmp_path / "in")
    out = tmp_path / "out"
    out.mkdir()
    cleaned = []
    monkeypatch.setattr(batch.local, "run_local", lambda jobs, *a, **k: cleaned.extend(jobs))

    def refuse(*a, **k):
        raise PermissionError(errno.EACCES, os.strerror(errno.EACCES))

    monkeypatch.setattr(batch.plan.tempfile, "mkstemp", refuse)
    code = main(["batch", "--recipe", str(recipe), "-o", str(out), *inputs])
    _assert_refused_before_work(code, capsys.readouterr().err, str(out), "permission denied")
    assert cleaned == []


def test_too_little_free_space_is_refused_before_any_work(tmp_path, capsys, monkeypatch):
    recipe, inputs = _inputs(tmp_path / "in", seconds=4.0)     # 64 kB of samples each
    cleaned = []
    monkeypatch.setattr(batch.local, "run_local", lambda jobs, *a, **k: cleaned.extend(jobs))
    with small_disk(tmp_path, 160 << 10) as disk:
        code = main(["batch", "--recipe", str(recipe), "-o", disk, *inputs])
        _assert_refused_before_work(code, capsys.readouterr().err, disk,
                                    "not enough disk space")
    assert cleaned == []


def test_estimate_matches_what_the_writer_writes(tmp_path):
    # Reference: the size of the file the batch really writes (os.path.getsize).
    recipe, inputs = _inputs(tmp_path / "in", seconds=1.5)
    out = tmp_path / "out"
    code = main(["batch", "--recipe", str(recipe), "-o", str(out), "--workers", "1", *inputs])
    assert code == 0
    for src in inputs:
        dst = out / os.path.basename(src)
        est = batch.estimate_output_bytes(src, str(dst))
        assert os.path.getsize(dst) <= est <= os.path.getsize(dst) + 4096


def test_batch_on_a_tls_scheduler_without_a_certificate_is_one_line(tmp_path):
    # Dask's docs: a tls:// client needs its certificate (distributed.comm.tls.*);
    # without one the batch stops before any work, as `clean --scheduler` does.
    import subprocess
    import sys

    recipe = tmp_path / "r.json"
    recipe.write_text('{"scalesieve_recipe": 1, "edits": []}')
    src = tmp_path / "in.wav"
    import numpy as np
    import soundfile as sf

    sf.write(str(src), np.zeros(4096), 8000)
    r = subprocess.run([sys.executable, "-m", "scalesieve", "batch", "--recipe", str(recipe),
                        "-o", str(tmp_path / "out"), "--scheduler", "tls://127.0.0.1:9",
                        str(src)], capture_output=True, text=True, timeout=120,
                       stdin=subprocess.DEVNULL)
    assert r.returncode == 2, r.stderr
    assert r.stderr.count("\n") == 1 and "needs this machine's certificate" in r.stderr
    assert "Traceback" not in r.stderr
