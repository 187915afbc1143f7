"""Write the reference outputs that tests/test_model_split_identical.py compares against.

Run once, from the project root, with the code as it stood before the model
became a package:  python tests/data/before_split/make_reference.py
It cleans every sample recording with each recipe below, through the command
line (``scalesieve clean``, output file bytes) and through the model (cleaned
and removed arrays, band table, metrics, events, and a sequence of edits
applied one at a time, which exercises the incremental updates), and writes
the SHA-256 of each result to manifest.json (the arrays of the smallest
recording also as .npy, to show where a difference lies).
"""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
import tempfile

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(os.path.dirname(HERE)))
SAMPLES = ["fan_bearing.wav", "pump_bearing.wav", "field_mic_clicks.flac",
           "lab_trace_baseline.csv", "rig_strain_logger.csv"]
#: recipe name -> recipe JSON; chosen to reach every path of the engine
RECIPES = {
    "universal_db4": {"scalesieve_recipe": 1,
                      "transform": {"kind": "dwt", "wavelet": "db4", "level": 6,
                                    "mode": "symmetric"},
                      "edits": [{"op": "threshold", "levels": "details", "rule": "universal",
                                 "shape": "soft", "noise": "finest"}]},
    "mixed_sym8": {"scalesieve_recipe": 1,
                   "transform": {"kind": "dwt", "wavelet": "sym8", "level": 5,
                                 "mode": "periodization"},
                   "edits": [{"op": "gain", "levels": [1], "gain": 0.0},
                             {"op": "threshold", "levels": [2, 3], "rule": "bayes",
                              "shape": "hard", "noise": "level"},
                             {"op": "region", "levels": [2, 3], "start_s": 0.5,
                              "stop_s": 0.9, "gain": 0.25},
                             {"op": "gain", "levels": ["a"], "gain": 0.5}]},
    "swt_sure": {"scalesieve_recipe": 1,
                 "transform": {"kind": "swt", "wavelet": "db2", "level": 4,
                               "mode": "periodization"},
                 "edits": [{"op": "threshold", "levels": "details", "rule": "sure",
                            "shape": "garrote", "noise": "finest"},
                           {"op": "gain", "levels": [4], "gain": 0.5}]},
    "packet_minimax": {"scalesieve_recipe": 1,
                       "transform": {"kind": "packet", "wavelet": "db4", "level": 3,
                                     "mode": "symmetric", "basis": "full"},
                       "edits": [{"op": "threshold", "bands": ["w3.5", "w3.6", "w3.7"],
                                  "rule": "minimax", "shape": "soft", "noise": "finest"},
                                 {"op": "gain", "bands": ["w3.0"], "gain": 0.0}]},
}


def sha(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def array_sha(a) -> str:
    a = np.ascontiguousarray(a, dtype=np.float64)
    return sha(a.tobytes())


def json_sha(obj) -> str:
    return sha(json.dumps(obj, sort_keys=True, allow_nan=True).encode())


def model_results(path: str, recipe_json: dict) -> dict:
    """Hashes of what the model gives for one recording and recipe."""
    from scalesieve import api
    from scalesieve.recipe import from_json as recipe_from_json

    recipe = recipe_from_json(recipe_json)
    rec = api.load(path)
    fresh = api.build_model(rec, recipe)
    out = {"cleaned": array_sha(fresh.cleaned()), "removed": array_sha(fresh.removed()),
           "bands": json_sha([fresh.band_table(k) for k in range(rec.channels)]),
           "metrics": json_sha([fresh.metrics(k) for k in range(rec.channels)])}
    # the same edits one at a time, then undo and redo: the incremental engine
    step = api.build_model(rec, None, transform=recipe.transform)
    for e in recipe.edits:
        step.add_edit(e)
    out["incremental"] = array_sha(step.cleaned())
    step.undo()
    out["undone"] = array_sha(step.cleaned())
    step.redo()
    step.settle()
    out["settled"] = array_sha(step.cleaned())
    events, noise = fresh.events()
    out["events"] = json_sha([repr(tuple(e)) for e in events] + [repr(noise)])
    return out


def cli_result(path: str, recipe_file: str, tmp: str, name: str) -> str:
    ext = os.path.splitext(path)[1]
    ext = ".csv" if ext == ".csv" else ".wav"
    out = os.path.join(tmp, name + ext)
    subprocess.run([sys.executable, "-m", "scalesieve", "clean", path, "-o", out,
                    "--recipe", recipe_file], check=True, capture_output=True)
    with open(out, "rb") as fh:
        return sha(fh.read())


def compute(tmp: str) -> dict:
    """Every result, keyed "sample/recipe"."""
    results = {}
    for rname, rj in RECIPES.items():
        rfile = os.path.join(tmp, rname + ".json")
        with open(rfile, "w") as fh:
            json.dump(rj, fh)
        for s in SAMPLES:
            path = os.path.join(ROOT, "sample_signals", s)
            r = model_results(path, rj)
            r["cli"] = cli_result(path, rfile, tmp, f"{s}.{rname}")
            results[f"{s}/{rname}"] = r
    return results


def main() -> None:
    from scalesieve import api

    commit = subprocess.run(["git", "-C", ROOT, "rev-parse", "HEAD"], capture_output=True,
                            text=True).stdout.strip()
    with tempfile.TemporaryDirectory() as tmp:
        results = compute(tmp)
    small = api.load(os.path.join(ROOT, "sample_signals", "lab_trace_baseline.csv"))
    from scalesieve.recipe import from_json as recipe_from_json

    for rname, rj in RECIPES.items():
        m = api.build_model(small, recipe_from_json(rj))
        np.save(os.path.join(HERE, f"lab_trace_baseline.{rname}.cleaned.npy"), m.cleaned())
    with open(os.path.join(HERE, "manifest.json"), "w") as fh:
        json.dump({"commit": commit, "results": results}, fh, indent=1, sort_keys=True)


if __name__ == "__main__":
    main()
