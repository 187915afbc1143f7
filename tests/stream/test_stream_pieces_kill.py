"""Time pieces when something dies: no torn output, nothing of ours left, one clear line.

Real processes, killed by PID while they hold a piece's file open: a local
worker of ``clean --workers 2`` (the run stops, writes nothing and says why),
the whole run at once as a power cut would (nothing written; the next write of
that output removes what it left), and a worker of a Dask ``LocalCluster`` with
worker processes (Dask runs the piece again elsewhere: the same samples).
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import threading
import time

import numpy as np
import psutil
import pytest
import soundfile as sf

from scalesieve.core.transforms import TransformSpec
from scalesieve.recipe import Edit
from scalesieve.stream.pieces import clean_pieces
from scalesieve.stream.pipeline import clean_stream

N = 600_001
ARGS = ["--transform", "swt", "--level", "6", "--mode", "periodic", "--threshold", "bayes",
        "--noise", "level", "--subtype", "DOUBLE"]
SPEC = TransformSpec("swt", "db4", 6, "periodic")
EDITS = [Edit("threshold", levels="details", rule="bayes", shape="soft", noise="level")]


def _recording(path):
    rng = np.random.default_rng(7)
    x = 0.05 * rng.standard_normal((N, 1))
    x[N // 3:N // 3 + 9, 0] += 0.9
    sf.write(path, x.astype(np.float32), 20_000, subtype="FLOAT")


def _holding_a_piece(root_pid: int) -> list[int]:
    """PIDs below ``root_pid`` with a piece's temporary file open."""
    try:
        procs = psutil.Process(root_pid).children(recursive=True)
    except psutil.NoSuchProcess:
        return []
    found = []
    for p in procs:
        try:
            if any("tmp-scalesieve-" in f.path and "-piece" in f.path for f in p.open_files()):
                found.append(p.pid)
        except (psutil.NoSuchProcess, psutil.AccessDenied):
            pass
    return found


def _wait_for_a_piece(root_pid: int, running, timeout: float = 120.0) -> list[int]:
    end = time.monotonic() + timeout
    while time.monotonic() < end and running():
        pids = _holding_a_piece(root_pid)
        if pids:
            return pids
        time.sleep(0.02)
    return []


def _ours(folder) -> list[str]:
    return sorted(n for n in os.listdir(folder) if n.startswith("."))


def _command(src, out, *more):
    return [sys.executable, "-m", "scalesieve", "clean", str(src), "-o", str(out), *ARGS,
            *more]


def test_a_local_worker_killed_mid_piece_stops_the_run_with_nothing_written(tmp_path):
    src, out = tmp_path / "in.wav", tmp_path / "out.wav"
    _recording(src)
    proc = subprocess.Popen(_command(src, out, "--workers", "2"), stderr=subprocess.PIPE,
                            stdout=subprocess.PIPE, text=True)
    victims = _wait_for_a_piece(proc.pid, lambda: proc.poll() is None)
    assert victims, "no worker took a piece"
    os.kill(victims[0], signal.SIGKILL)
    stdout, stderr = proc.communicate(timeout=300)
    assert proc.returncode == 2, stderr
    lines = [ln for ln in stderr.splitlines() if ln.strip()]
    assert len(lines) == 1 and lines[0].startswith("scalesieve: error:"), stderr
    assert "a worker process stopped before its piece was cleaned" in lines[0]
    assert "Traceback" not in stderr
    assert not out.exists() and _ours(tmp_path) == []


def test_the_whole_run_killed_leaves_no_output_and_the_next_write_tidies(tmp_path):
    src, out = tmp_path / "in.wav", tmp_path / "out.wav"
    _recording(src)
    proc = subprocess.Popen(_command(src, out, "--workers", "2"), stderr=subprocess.DEVNULL,
                            stdout=subprocess.DEVNULL, start_new_session=True)
    assert _wait_for_a_piece(proc.pid, lambda: proc.poll() is None), "no worker took a piece"
    group = [proc.pid] + [p.pid for p in psutil.Process(proc.pid).children(recursive=True)]
    os.killpg(proc.pid, signal.SIGKILL)          # the run's own process group: a power cut
    proc.wait(timeout=60)
    psutil.wait_procs([psutil.Process(p) for p in group if psutil.pid_exists(p)], timeout=60)
    assert not out.exists()
    assert _ours(tmp_path), "the killed run left its pieces' files"
    done = subprocess.run(_command(src, out, "--workers", "2"), capture_output=True, text=True,
                          timeout=300)
    assert done.returncode == 0, done.stderr
    assert _ours(tmp_path) == []
    one = tmp_path / "one.wav"
    clean_stream(str(src), str(one), transform=SPEC, edits=EDITS, subtype="DOUBLE")
    np.testing.assert_array_equal(sf.read(out)[0], sf.read(one)[0])


def test_a_dask_worker_killed_mid_piece_is_run_again_with_the_same_samples(tmp_path):
    from dask.distributed import LocalCluster

    src, out = tmp_path / "in.wav", tmp_path / "out.wav"
    _recording(src)
    killed: list[int] = []
    finished = threading.Event()

    def killer():
        pids = _wait_for_a_piece(os.getpid(), lambda: not finished.is_set())
        if pids:
            os.kill(pids[0], signal.SIGKILL)
            killed.append(pids[0])

    with LocalCluster(host="127.0.0.1", protocol="tcp://", dashboard_address=":0",
                      n_workers=2, threads_per_worker=1, processes=True) as cluster:
        thread = threading.Thread(target=killer, daemon=True)
        thread.start()
        try:
            res = clean_pieces(str(src), str(out), scheduler=cluster.scheduler_address,
                               pieces=2, transform=SPEC, edits=EDITS, subtype="DOUBLE")
        finally:
            finished.set()
            thread.join(10)
    assert killed, "no worker was killed mid-piece"
    assert len(res["pieces"]) == 2
    one = tmp_path / "one.wav"
    clean_stream(str(src), str(one), transform=SPEC, edits=EDITS, subtype="DOUBLE")
    np.testing.assert_array_equal(sf.read(out)[0], sf.read(one)[0])
    assert _ours(tmp_path) == []


if not sys.platform.startswith("linux"):  # pragma: no cover - open files read from /proc
    pytestmark = pytest.mark.skip("needs Linux's /proc for the open files")
