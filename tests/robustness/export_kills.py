"""Kill real ``scalesieve clean --force`` exports at random moments; count torn files.

    python tests/robustness/export_kills.py --kills 500

Each trial starts ``python -m scalesieve clean IN -o OUT --force --zero 1``
over an OUT that already holds an older export, sends SIGKILL after a random
delay, and then looks at OUT: it must be the old bytes or the complete new
file, byte for byte the same as an export that was left to finish.  Every
file left beside it must be one of our temporary files (named
``.<stem>.tmp-scalesieve-<pid>.<host>-…``), and the next export that runs to
completion must remove them all.  Half the delays fall anywhere in a run,
half inside the window in which the new file is being written (measured on
the reference run), so kills mid-write are common.  The input is never
changed.  Prints one JSON summary; exit status 1 if any file was torn.
"""

from __future__ import annotations

import argparse
import hashlib
import json
import os
import random
import signal
import subprocess
import sys
import time

import numpy as np
import soundfile as sf

TEMP_MARK = ".tmp-scalesieve-"
TARGETS = ("out.wav", "out.csv")


def _sha(path: str) -> str:
    with open(path, "rb") as fh:
        return hashlib.sha256(fh.read()).hexdigest()


def _command(folder: str, target: str, zero: str = "1") -> list[str]:
    return [sys.executable, "-m", "scalesieve", "clean", os.path.join(folder, "in.wav"),
            "-o", os.path.join(folder, target), "--force", "--zero", zero]


def _env() -> dict:
    return dict(os.environ, OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1")


def prepare(folder: str, frames: int = 200_000, reference_runs: int = 3) -> dict:
    """The input, an old export under each target name, and the reference new export."""
    rng = np.random.default_rng(20260114)  # an invented pump recording: noise and hum
    t = np.arange(frames) / 48000.0
    x = np.column_stack([0.2 * rng.standard_normal(frames) + 0.3 * np.sin(2 * np.pi * 50 * t),
                         0.1 * rng.standard_normal(frames)])
    # PCM_24 is kept by the export and carries no time stamp (a float WAV's PEAK chunk
    # does), so two complete exports are byte-identical.
    sf.write(os.path.join(folder, "in.wav"), x, 48000, subtype="PCM_24")
    facts = {"input_sha256": _sha(os.path.join(folder, "in.wav")), "targets": {}}
    for target in TARGETS:
        path = os.path.join(folder, target)
        subprocess.run(_command(folder, target, zero="2"), check=True, capture_output=True,
                       env=_env())
        with open(path, "rb") as fh:
            old_bytes = fh.read()
        # The median of a few runs: a machine shared with other work is uneven.
        runs = [_reference(folder, target) for _ in range(reference_runs)]
        window = tuple(sorted(r[i] for r in runs)[len(runs) // 2] for i in range(3))
        new = _sha(path)
        old = hashlib.sha256(old_bytes).hexdigest()
        if old == new:
            raise RuntimeError("the old and new exports must differ")
        facts["targets"][target] = {"old": old, "new": new, "window": window,
                                    "old_bytes": old_bytes}
        _restore(path, old_bytes)
    return facts


def _restore(path: str, data: bytes) -> None:
    """Put the old export back (by rename, so the next trial again replaces a whole file)."""
    tmp = path + ".restore"
    with open(tmp, "wb") as fh:
        fh.write(data)
    os.replace(tmp, path)


def _leftovers(folder: str) -> list[str]:
    return sorted(n for n in os.listdir(folder) if TEMP_MARK in n)


def _reference(folder: str, target: str) -> tuple[float, float, float]:
    """Run one export to its end; return when its temporary file appeared and vanished,
    and when the process ended (seconds from the start)."""
    start = time.monotonic()
    proc = subprocess.Popen(_command(folder, target), stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL, env=_env())
    seen = gone = None
    while proc.poll() is None:
        now = time.monotonic() - start
        here = bool(_leftovers(folder))
        if here and seen is None:
            seen = now
        if not here and seen is not None and gone is None:
            gone = now
        time.sleep(0.002)
    end = time.monotonic() - start
    if proc.returncode != 0:
        raise RuntimeError(f"reference export failed with {proc.returncode}")
    seen = end * 0.5 if seen is None else seen
    return seen, gone if gone is not None else end, end


def _readable(path: str, target: str) -> bool:
    try:
        if target.endswith(".wav"):
            return sf.info(path).frames > 0
        with open(path, encoding="utf-8") as fh:
            return fh.readline().startswith("time_s")
    except Exception:
        return False


def run_kills(folder: str, kills: int, seed: int = 0, *, frames: int = 200_000,
              reference_runs: int = 3) -> dict:
    """``kills`` killed exports in ``folder``; a summary of what each left."""
    facts = prepare(folder, frames, reference_runs)
    rng = random.Random(seed)
    counts = {"kills": 0, "old_file": 0, "new_file": 0, "torn": 0, "finished_before_kill": 0,
              "killed_while_writing": 0, "leftover_temporaries_seen": 0,
              "foreign_files": 0, "most_leftovers_at_once": 0}
    torn = []
    expected = {"in.wav"} | set(TARGETS)
    k = -1
    # Trials go on until `kills` exports were really killed (some finish first).
    while counts["kills"] < kills and k < 10 * kills:
        k += 1
        target = TARGETS[k % len(TARGETS)]
        info = facts["targets"][target]
        t_seen, t_gone, t_end = info["window"]
        if rng.random() < 0.5:
            delay = rng.uniform(0.0, t_end)
        else:
            delay = rng.uniform(max(0.0, t_seen - 0.02), t_gone + 0.02)
        before = set(_leftovers(folder))
        proc = subprocess.Popen(_command(folder, target), stdout=subprocess.DEVNULL,
                                stderr=subprocess.DEVNULL, env=_env())
        time.sleep(delay)
        if proc.poll() is None:
            os.kill(proc.pid, signal.SIGKILL)
            counts["kills"] += 1
        else:
            counts["finished_before_kill"] += 1
            # Runs got quicker than the reference (less load now): aim earlier.
            scale = 0.95 * delay / t_end
            if scale < 1.0:
                info["window"] = tuple(v * scale for v in info["window"])
        proc.wait()
        path = os.path.join(folder, target)
        digest = _sha(path) if os.path.exists(path) else None
        if digest == info["old"]:
            counts["old_file"] += 1
        elif digest == info["new"] and _readable(path, target):
            counts["new_file"] += 1
        else:
            counts["torn"] += 1
            torn.append({"trial": k, "target": target, "delay_s": round(delay, 4),
                         "exists": digest is not None})
        left = _leftovers(folder)
        if set(left) - before:  # this export's own temporary file stayed behind
            counts["killed_while_writing"] += 1
        counts["leftover_temporaries_seen"] += len(left)
        counts["most_leftovers_at_once"] = max(counts["most_leftovers_at_once"], len(left))
        others = set(os.listdir(folder)) - expected - set(left)
        counts["foreign_files"] += len(others)
        # Put the old file back so the next kill can again catch a replacement.
        if digest != info["old"]:
            _restore(path, info["old_bytes"])
    # One export of each target left to finish: it must sweep every leftover away.
    for target in TARGETS:
        subprocess.run(_command(folder, target), check=True, capture_output=True, env=_env())
    summary = dict(counts)
    summary.update({
        "trials": k + 1, "torn_files": torn,
        "leftovers_after_clean_exports": _leftovers(folder),
        "input_unchanged": _sha(os.path.join(folder, "in.wav")) == facts["input_sha256"],
        "final_files_complete": all(_sha(os.path.join(folder, t)) == facts["targets"][t]["new"]
                                    for t in TARGETS),
        "write_windows_s": {t: [round(v, 3) for v in facts["targets"][t]["window"]]
                            for t in TARGETS},
    })
    return summary


def main(argv=None) -> int:
    import tempfile

    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--kills", type=int, default=200,
                   help="how many exports to kill (default 200)")
    p.add_argument("--seed", type=int, default=0)
    p.add_argument("--folder", help="work here instead of a new temporary folder")
    args = p.parse_args(argv)
    folder = args.folder or tempfile.mkdtemp(prefix="scalesieve-kills-")
    summary = run_kills(folder, args.kills, args.seed)
    summary["folder"] = folder
    print(json.dumps(summary, indent=1))
    bad = summary["torn"] or summary["leftovers_after_clean_exports"] or \
        not summary["input_unchanged"] or not summary["final_files_complete"]
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
