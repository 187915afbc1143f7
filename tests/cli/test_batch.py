"""`batch` per docs/reference.md: local processes, a Dask LocalCluster, the report.

Outside references: Python's ``hashlib`` (input hashes), ``wave`` (sample
counts and rates of the inputs), ``shlex`` and ``/bin/sh`` (the command line
the window shows), ``datetime.fromisoformat`` (ISO-8601 stamps), and
``scalesieve clean`` itself for "each output equals what clean writes".
"""

import datetime
import filecmp
import hashlib
import json
import os
import shlex
import shutil
import subprocess
import sys
import wave

import numpy as np
import pytest

from scalesieve import batch
from scalesieve.cli import main
from scalesieve.recipe import Edit

RECIPE = {"scalesieve_recipe": 1,
          "transform": {"kind": "dwt", "wavelet": "db4", "level": 5, "mode": "symmetric"},
          "edits": [{"op": "gain", "levels": ["a"], "gain": 0.0},
                    {"op": "threshold", "levels": "details", "rule": "universal",
                     "shape": "soft", "noise": "finest"},
                    {"op": "region", "levels": [1, 2], "start_s": 0.10, "stop_s": 0.12,
                     "gain": 0.0}]}
GOOD = ("pump_a.wav", "pump_b.wav", "pump_c.wav", "rig_log.csv")
BROKEN = "pump_truncated.wav"
CONTRACT_KEYS = {"input", "output", "status", "error", "input_sha256", "samples", "rate",
                 "seconds"}


def cli(*argv, cwd=None):
    return subprocess.run([sys.executable, "-m", "scalesieve", *argv], capture_output=True,
                          text=True, timeout=120, cwd=cwd)


def _wav16(path, x, rate):
    # written with Python's own wave module: 16-bit PCM, mono
    pcm = np.clip(np.round(x * 32767), -32768, 32767).astype("<i2")
    with wave.open(str(path), "wb") as w:
        w.setnchannels(1)
        w.setsampwidth(2)
        w.setframerate(rate)
        w.writeframes(pcm.tobytes())


def make_campaign(folder):
    """Three invented pump recordings, a strain-logger CSV and one cut-off WAV."""
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(7)
    for k, name in enumerate(GOOD[:3]):
        n = 6000 + 1000 * k
        t = np.arange(n) / 8000
        x = 0.2 * np.sin(2 * np.pi * 120 * t) + 0.02 * rng.standard_normal(n)
        x[1000 + 300 * k] += 0.5  # an impact
        _wav16(folder / name, x, 8000)
    # logger export: semicolon, decimal comma, time column in ms (CONTRACT's CSV input)
    rows = ["time_ms;strain_1;strain_2"]
    for i in range(3000):
        a, b = 0.001 * i + rng.normal(0, 0.1), -0.002 * i + rng.normal(0, 0.1)
        rows.append(f"{i};{a:.5f};{b:.5f}".replace(".", ","))
    (folder / GOOD[3]).write_text("\n".join(rows) + "\n")
    # a WAV cut off inside its header, as a recorder that lost power leaves it
    whole = (folder / GOOD[0]).read_bytes()
    (folder / BROKEN).write_bytes(whole[:30])
    recipe = folder.parent / "recipe.json"
    recipe.write_text(json.dumps(RECIPE))
    return recipe


@pytest.fixture(scope="module")
def campaign(tmp_path_factory):
    root = tmp_path_factory.mktemp("campaign")
    recipe = make_campaign(root / "in")
    # single-file `clean` on every good input: what each batch output must equal
    ref = root / "ref"
    ref.mkdir()
    for name in GOOD:
        r = cli("clean", str(root / "in" / name), "-o", str(ref / name), "--recipe", str(recipe))
        assert r.returncode == 0, r.stderr
    return root, recipe


@pytest.fixture(scope="module")
def local_run(campaign):
    root, recipe = campaign
    out = root / "out_local"
    inputs = [str(root / "in" / BROKEN)] + [str(root / "in" / n) for n in GOOD]
    r = cli("batch", "--recipe", str(recipe), "-o", str(out), "--workers", "2", *inputs)
    return r, out


def _report(out):
    with open(out / "batch-report.json", encoding="utf-8") as fh:
        return json.load(fh)


def _assert_same_as_clean(root, out):
    for name in GOOD:
        assert filecmp.cmp(root / "ref" / name, out / name, shallow=False), name


def test_local_batch_broken_file_exit_1_others_written(campaign, local_run):
    root, _ = campaign
    r, out = local_run
    assert r.returncode == 1, r.stderr
    assert "Traceback" not in r.stderr
    assert any(BROKEN in line and line.startswith("scalesieve: error: ")
               for line in r.stderr.splitlines())
    for name in GOOD:
        assert (out / name).is_file()
    assert not (out / BROKEN).exists()
    # nothing half-written is left beside the outputs
    assert sorted(os.listdir(out)) == sorted(list(GOOD) + ["batch-report.json"])


def test_local_outputs_identical_to_single_file_clean(campaign, local_run):
    root, _ = campaign
    _, out = local_run
    _assert_same_as_clean(root, out)


def test_report_contract(campaign, local_run):
    root, recipe = campaign
    _, out = local_run
    rep = _report(out)
    assert rep["recipe"] == RECIPE
    started = datetime.datetime.fromisoformat(rep["started"])
    finished = datetime.datetime.fromisoformat(rep["finished"])
    assert started.tzinfo is not None and finished >= started
    assert rep["versions"]["scalesieve"] and rep["versions"]["numpy"]
    files = rep["files"]
    # in the order given, the broken file first
    assert [os.path.basename(e["input"]) for e in files] == [BROKEN] + list(GOOD)
    for e in files:
        assert CONTRACT_KEYS <= set(e)
        name = os.path.basename(e["input"])
        # a failed file claims no output (docs/reference.md: its "output" is null)
        assert e["output"] == (str(out / name) if e["status"] == "ok" else None)
        assert e["input_sha256"] == hashlib.sha256((root / "in" / name).read_bytes()).hexdigest()
        assert e["seconds"] >= 0
    bad = files[0]
    assert bad["status"] == "error" and BROKEN in bad["error"]
    assert bad["samples"] is None and bad["rate"] is None
    for e in files[1:]:
        assert e["status"] == "ok" and e["error"] is None
    for e in files[1:4]:
        with wave.open(e["input"], "rb") as w:   # Python's wave module as the reference
            assert (e["samples"], e["rate"]) == (w.getnframes(), float(w.getframerate()))
    # the CSV's rate comes from its ms time column: 1 ms steps -> 1000 Hz
    assert (files[4]["samples"], files[4]["rate"]) == (3000, 1000.0)


def test_usage_errors_exit_2_before_any_work(tmp_path, capsys):
    recipe = make_campaign(tmp_path / "in")
    other = tmp_path / "other"
    other.mkdir()
    shutil.copy(tmp_path / "in" / GOOD[0], other / GOOD[0])
    out = tmp_path / "out"
    # two inputs sharing a name
    assert main(["batch", "--recipe", str(recipe), "-o", str(out),
                 str(tmp_path / "in" / GOOD[0]), str(other / GOOD[0])]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("scalesieve: error: ") and "name" in err[0]
    assert not out.exists()
    # an invalid recipe
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps({"scalesieve_recipe": 1, "edits": [{"op": "boost", "levels": [1]}]}))
    assert main(["batch", "--recipe", str(bad), "-o", str(out),
                 str(tmp_path / "in" / GOOD[0])]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "boost" in err[0]
    assert not out.exists()
    # writing into the inputs' own folder would overwrite them
    before = (tmp_path / "in" / GOOD[0]).read_bytes()
    assert main(["batch", "--recipe", str(recipe), "-o", str(tmp_path / "in"), "--force",
                 str(tmp_path / "in" / GOOD[0])]) == 2
    assert "never overwritten" in capsys.readouterr().err
    assert (tmp_path / "in" / GOOD[0]).read_bytes() == before
    # --send-data without a cluster
    assert main(["batch", "--recipe", str(recipe), "-o", str(out), "--send-data",
                 str(tmp_path / "in" / GOOD[0])]) == 2
    capsys.readouterr()


def test_existing_outputs_need_force(tmp_path, capsys):
    recipe = make_campaign(tmp_path / "in")
    out = tmp_path / "out"
    out.mkdir()
    (out / GOOD[1]).write_bytes(b"keep me")
    args = ["batch", "--recipe", str(recipe), "-o", str(out), "--workers", "1",
            str(tmp_path / "in" / GOOD[0]), str(tmp_path / "in" / GOOD[1])]
    assert main(args) == 2
    assert "--force" in capsys.readouterr().err
    assert (out / GOOD[1]).read_bytes() == b"keep me"
    assert sorted(os.listdir(out)) == [GOOD[1]]
    assert main(args + ["--force"]) == 0
    assert (out / GOOD[1]).read_bytes() != b"keep me"
    # a second run finds the report too, and leaves it alone without --force
    report = (out / "batch-report.json").read_bytes()
    (out / GOOD[0]).unlink()
    (out / GOOD[1]).unlink()
    assert main(args) == 2
    assert "batch-report.json" in capsys.readouterr().err
    assert (out / "batch-report.json").read_bytes() == report


def test_folder_and_pattern_inputs(tmp_path, capsys):
    recipe = make_campaign(tmp_path / "in")
    (tmp_path / "in" / BROKEN).unlink()
    out = tmp_path / "out"
    # a folder; and a pattern left unexpanded, as Windows shells pass it
    assert main(["batch", "--recipe", str(recipe), "-o", str(out), "--workers", "2",
                 str(tmp_path / "in")]) == 0
    assert sorted(os.listdir(out)) == sorted(list(GOOD) + ["batch-report.json"])
    out2 = tmp_path / "out2"
    assert main(["batch", "--recipe", str(recipe), "-o", str(out2),
                 str(tmp_path / "in" / "pump_*.wav")]) == 0
    assert sorted(os.listdir(out2)) == sorted(list(GOOD[:3]) + ["batch-report.json"])
    assert "3 of 3 files" in capsys.readouterr().out


def _die_on_b(job):
    # stands in for a library crash inside a worker process
    if os.path.basename(job.input) == GOOD[1]:
        os._exit(3)
    return batch.run_job(job)


def test_dead_worker_process_fails_only_its_file(tmp_path):
    make_campaign(tmp_path / "in")
    pairs = batch.plan_outputs([str(tmp_path / "in" / n) for n in GOOD], str(tmp_path / "out"))
    (tmp_path / "out").mkdir()
    mute_d1 = (Edit("gain", levels=(1,), gain=0.0),)
    jobs = [batch.FileJob(i, s, d, {"edits": mute_d1}) for i, (s, d) in enumerate(pairs)]
    got = []
    batch.run_local(jobs, 2, got.append, job_fn=_die_on_b)
    by_name = {os.path.basename(e["input"]): e for e in got}
    assert sorted(by_name) == sorted(GOOD)
    assert by_name[GOOD[1]]["status"] == "error"
    assert "worker process stopped" in by_name[GOOD[1]]["error"]
    for name in (GOOD[0], GOOD[2], GOOD[3]):
        assert by_name[name]["status"] == "ok", by_name[name]["error"]
        assert (tmp_path / "out" / name).is_file()


def _cluster(**kw):
    from dask.distributed import LocalCluster

    # tcp even for in-process workers: the batch connects by address, as to a real cluster
    return LocalCluster(host="127.0.0.1", protocol="tcp://", dashboard_address=":0", **kw)


def test_dask_local_cluster_shared_paths(campaign, capsys):
    root, recipe = campaign
    out = root / "out_dask_threads"
    inputs = [str(root / "in" / n) for n in GOOD] + [str(root / "in" / BROKEN)]
    with _cluster(n_workers=1, threads_per_worker=2, processes=False) as cluster:
        rc = main(["batch", "--recipe", str(recipe), "-o", str(out),
                   "--scheduler", cluster.scheduler_address, *inputs])
    err = capsys.readouterr().err
    assert rc == 1, err
    _assert_same_as_clean(root, out)
    rep = _report(out)
    assert rep["run"]["scheduler"] == cluster.scheduler_address
    assert rep["versions"]["distributed"]
    assert [e["status"] for e in rep["files"]] == ["ok"] * 4 + ["error"]


def test_dask_worker_processes_send_data(campaign, capsys):
    # a real cluster process that is sent the bytes: it needs no access to the paths
    root, recipe = campaign
    out = root / "out_dask_sent"
    ghost = root / "in" / "pump_never_recorded.wav"
    inputs = [str(root / "in" / n) for n in GOOD] + [str(root / "in" / BROKEN), str(ghost)]
    with _cluster(n_workers=1, threads_per_worker=1, processes=True) as cluster:
        rc = main(["batch", "--recipe", str(recipe), "-o", str(out), "--send-data",
                   "--scheduler", cluster.scheduler_address, *inputs])
    err = capsys.readouterr().err
    assert rc == 1, err
    _assert_same_as_clean(root, out)
    rep = _report(out)
    assert [e["status"] for e in rep["files"]] == ["ok"] * 4 + ["error"] * 2
    # the worker's private copy is never named; the user's file is
    assert str(root / "in" / BROKEN) in rep["files"][4]["error"]
    assert str(ghost) in rep["files"][5]["error"] and "not found" in rep["files"][5]["error"]
    for e in rep["files"][:5]:   # hashed on the client, from the bytes it sent
        assert e["input_sha256"] == hashlib.sha256(open(e["input"], "rb").read()).hexdigest()
    assert rep["files"][0]["worker"].split(":")[-1] != str(os.getpid())
    assert sorted(os.listdir(out)) == sorted(list(GOOD) + ["batch-report.json"])


class _FakeClient:
    # answers client.run(...) as a cluster whose workers see other things
    def __init__(self, views):
        self.views = views

    def run(self, fn, *args):
        return self.views


def test_cluster_check_refuses_workers_that_cannot_do_the_work():
    from scalesieve import __version__
    from scalesieve.errors import ScalesieveError

    ok = {"scalesieve": __version__, "outdir": True, "input": True}
    addr = "tcp://10.0.0.5:8786"
    batch.check_cluster(_FakeClient({"tcp://w1:1": ok}), addr, "/shared/out", "/shared/a.wav")
    cases = [({"tcp://w1:1": ok, "tcp://w2:1": {**ok, "outdir": False}}, "--send-data"),
             ({"tcp://w1:1": {**ok, "input": False}}, "same paths"),
             ({"tcp://w1:1": {**ok, "scalesieve": "0.0.1"}}, "same version"),
             ({}, "no workers")]
    for views, needle in cases:
        with pytest.raises(ScalesieveError, match=needle):
            batch.check_cluster(_FakeClient(views), addr, "/shared/out", "/shared/a.wav")


def test_scheduler_without_dask_says_how_to_install(tmp_path, capsys, monkeypatch):
    recipe = make_campaign(tmp_path / "in")
    args = ["batch", "--recipe", str(recipe), "-o", str(tmp_path / "out"),
            str(tmp_path / "in" / GOOD[0])]
    monkeypatch.setitem(sys.modules, "dask.distributed", None)  # as if not installed
    assert main(args + ["--scheduler", "tcp://127.0.0.1:9"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and ".[cluster]" in err[0]
    assert not (tmp_path / "out").exists()


def test_batch_command_line_runs_as_shown(tmp_path):
    # the window's recipe export plus the line it shows, run through /bin/sh
    from scalesieve import api

    folder = tmp_path / "pump runs"
    make_campaign(folder)
    (folder / BROKEN).unlink()
    (folder / GOOD[3]).unlink()
    rec = api.load(str(folder / GOOD[0]))
    model = api.build_model(rec, api.load_recipe(str(tmp_path / "recipe.json")))
    exported = tmp_path / "my recipe.json"
    api.save_recipe(model, str(exported))
    out = tmp_path / "cleaned runs"
    program = shlex.quote(sys.executable) + " -m scalesieve"
    line = batch.batch_command_line(str(exported), batch.inputs_hint_for(str(folder / GOOD[0])),
                                    str(out), 2, program=program, shell="posix")
    words = shlex.split(line)   # Python's shlex as the POSIX-shell reference
    assert words[:4] == [sys.executable, "-m", "scalesieve", "batch"]
    assert words[words.index("--recipe") + 1] == str(exported)
    assert words[words.index("-o") + 1] == str(out)
    assert words[words.index("--workers") + 1] == "2"
    r = subprocess.run(["/bin/sh", "-c", line], capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    assert sorted(os.listdir(out)) == sorted(list(GOOD[:3]) + ["batch-report.json"])
    assert _report(out)["recipe"] == RECIPE


def test_batch_command_line_quoting_for_windows():
    line = batch.batch_command_line(r"C:\data\my recipe.json", r"C:\data\pump runs\*.wav",
                                    r"C:\out", None, scheduler="tcp://10.0.0.5:8786",
                                    shell="windows")
    assert line == (r'scalesieve batch --recipe "C:\data\my recipe.json" -o C:\out '
                    r'--scheduler tcp://10.0.0.5:8786 "C:\data\pump runs\*.wav"')


def test_windows_quoting_matches_list2cmdline():
    # subprocess.list2cmdline implements the Microsoft C runtime quoting rules
    for arg in (r"C:\out dir" + "\\", 'say "hi" there', r"C:\a b\c", "tab\there"):
        line = batch.batch_command_line("r.json", "x.wav", arg, None, shell="windows")
        assert subprocess.list2cmdline([arg]) in line


def test_batch_never_imports_qt(campaign, tmp_path):
    root, recipe = campaign
    code = ("import sys; from scalesieve.cli import main; "
            f"rc = main(['batch', '--recipe', {str(recipe)!r}, '-o', {str(tmp_path / 'o')!r}, "
            f"'--workers', '1', {str(root / 'in' / GOOD[0])!r}]); "
            "assert rc == 0, rc; "
            "assert not any(m.startswith(('PySide6', 'pyqtgraph')) for m in sys.modules)")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    assert r.returncode == 0, r.stderr
