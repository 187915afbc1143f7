"""Recipes are data: JSON only, checked against a schema, every value range-checked.

Each refusal must name what is wrong (the edit, its op, the key or value).
JSON itself (RFC 8259) has no NaN or infinity; Python's json module writes
them as NaN/Infinity tokens and reads 1e400 as inf, so those are tried too.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from scalesieve import api
from scalesieve.core.recording import Recording
from scalesieve.errors import ScalesieveError
from scalesieve.recipe import Edit, MAX_EDITS, load, loads


def refused(text: str, *expected: str) -> str:
    with pytest.raises(ScalesieveError) as info:
        loads(text, "r.json")
    msg = info.value.one_line()
    for word in expected:
        assert word in msg, msg
    assert "\n" not in msg and len(msg) < 300
    return msg


def recipe(*edits, transform=None) -> str:
    doc = {"scalesieve_recipe": 1, "edits": list(edits)}
    if transform is not None:
        doc["transform"] = transform
    return json.dumps(doc)


def test_a_valid_recipe_reads():
    r = loads(recipe({"op": "gain", "levels": [1, "a"], "gain": 0},
                     {"op": "threshold", "levels": "details", "rule": "manual", "value": 0.02,
                      "shape": "hard", "noise": "level", "scale": 2},
                     {"op": "region", "levels": [2], "start_s": 0.1, "stop_s": 0.2},
                     transform={"kind": "swt", "wavelet": "sym8", "level": 5,
                                "mode": "periodization"}))
    assert [e.op for e in r.edits] == ["gain", "threshold", "region"]
    assert r.edits[2].gain == 0.0 and r.transform.level == 5


def test_unknown_keys_and_ops_are_named():
    refused(recipe({"op": "sharpen", "levels": [1]}), "edit 1", "unknown op 'sharpen'",
            "gain, threshold, region")
    refused(recipe({"op": "gain", "levels": [1], "gain": 0, "gian": 1}), "edit 1 (gain)",
            "unknown key 'gian'")
    refused('{"scalesieve_recipe": 1, "edits": [], "comment": "x"}', "unknown key 'comment'")
    refused(recipe(transform={"kind": "dwt", "wavlet": "db4"}), "transform", "'wavlet'")
    refused(recipe({"op": "region", "levels": [1], "start_s": 0}), "edit 1 (region)",
            "missing key 'stop_s'")


@pytest.mark.parametrize("token", ["NaN", "Infinity", "-Infinity", "1e400", "-1e999"])
@pytest.mark.parametrize("key", ["gain", "start_s"])
def test_nan_and_infinity_are_refused(token, key):
    edit = {"op": "region", "levels": [1], "start_s": 0.1, "stop_s": 0.2, "gain": 0.5}
    edit[key] = "@"
    msg = refused(recipe(edit).replace('"@"', token), "r.json")
    assert "invalid JSON" in msg or "finite" in msg


@pytest.mark.parametrize("edit,words", [
    ({"op": "gain", "levels": [1], "gain": -0.5}, ["edit 1", "gain", "minimum"]),
    ({"op": "gain", "levels": [1], "gain": 1e7}, ["edit 1", "gain", "maximum"]),
    ({"op": "gain", "levels": [1], "gain": "0"}, ["edit 1", "gain", "type"]),
    ({"op": "gain", "levels": [0], "gain": 0}, ["edit 1", "levels"]),
    ({"op": "gain", "levels": [10 ** 40], "gain": 0}, ["edit 1", "levels"]),
    ({"op": "gain", "levels": [], "gain": 0}, ["edit 1", "levels"]),
    ({"op": "gain", "levels": "most", "gain": 0}, ["edit 1", "levels"]),
    ({"op": "gain", "levels": [1], "gain": 0, "channels": [-1]}, ["edit 1", "channels"]),
    ({"op": "gain", "levels": [1], "gain": 0, "enabled": "no"}, ["edit 1", "enabled"]),
    ({"op": "threshold", "levels": [1], "rule": "manual"}, ["edit 1", "needs a 'value'"]),
    ({"op": "threshold", "levels": [1], "rule": "median"}, ["edit 1", "rule", "universal"]),
    ({"op": "threshold", "levels": [1], "rule": "sure", "scale": -1}, ["edit 1", "scale"]),
    ({"op": "region", "levels": [1], "start_s": 0.3, "stop_s": 0.2},
     ["edit 1 (region)", "must be before"]),
    ({"op": "region", "levels": [1], "start_s": -1, "stop_s": 0.2}, ["edit 1", "start_s"]),
])
def test_values_are_range_checked(edit, words):
    refused(recipe(edit), *words)


def test_not_a_recipe_or_not_json(tmp_path):
    refused("levels: [1]\nop: gain\n", "not a recipe", "invalid JSON")
    refused('{"edits": []}', "not a Scalesieve recipe")
    refused('{"scalesieve_recipe": 2, "edits": []}', "version 2")
    refused('{"scalesieve_recipe": true, "edits": []}', "version True")
    refused('{"scalesieve_recipe": 1, "edits": [], "edits": []}', "appears twice")
    refused('{"scalesieve_recipe": 1, "edits": ' + "[" * 50000 + "]" * 50000 + "}", "nested")
    refused(recipe(*[{"op": "gain", "levels": [1], "gain": 1}] * (MAX_EDITS + 1)),
            f"at most {MAX_EDITS}")
    refused(recipe(transform={"wavelet": "morl"}), "morl", "discrete")
    p = tmp_path / "r.json"
    p.write_bytes(b"\xff\xfe" + recipe().encode("utf-16-le"))   # UTF-16 with BOM is read
    assert load(p).edits == ()
    p.write_bytes(b"\x80\x81 not text")
    with pytest.raises(ScalesieveError, match="not UTF-8"):
        load(p)
    with pytest.raises(ScalesieveError, match="folder"):
        load(tmp_path)


def test_recipe_from_a_pipe_is_refused_not_waited_on(tmp_path):
    import os

    fifo = tmp_path / "r.json"
    os.mkfifo(fifo)
    with pytest.raises(ScalesieveError, match="not a regular file"):
        load(fifo)


# ----------------------------------------------- against the recording and transform

@pytest.fixture
def model_input():
    t = np.arange(4000) / 1000.0       # 4 s at 1 kHz, 2 channels
    return Recording(np.column_stack([np.sin(7 * t), np.cos(3 * t)]), 1000.0, ["a", "b"],
                     source="rig.csv")


def build(rec, *edits, level=4):
    r = loads(recipe(*edits, transform={"kind": "dwt", "wavelet": "db4", "level": level}),
              "r.json")
    return api.build_model(rec, r)


def test_levels_must_be_inside_the_transform(model_input):
    with pytest.raises(ScalesieveError, match=r"edit 2 \(gain\): level 5 is not in the "
                                              r"transform \(it has detail levels 1-4 and a\)"):
        build(model_input, {"op": "gain", "levels": [1], "gain": 0},
              {"op": "gain", "levels": [5], "gain": 0})


def test_times_must_be_inside_the_recording(model_input):
    for start, stop in ((4.5, 5.0), (3.9, 4.2)):
        with pytest.raises(ScalesieveError, match=r"edit 1 \(region\).*not inside the "
                                                  r"recording \(0-4 s\)"):
            build(model_input, {"op": "region", "levels": [1], "start_s": start,
                                "stop_s": stop})
    # Up to the very end is inside.
    m = build(model_input, {"op": "region", "levels": [1], "start_s": 3.5, "stop_s": 4.0})
    assert len(m.edits) == 1


def test_channels_must_exist(model_input):
    with pytest.raises(ScalesieveError, match="channel 2 is not in the recording"):
        build(model_input, {"op": "gain", "levels": [1], "gain": 0, "channels": [0, 2]})


def test_edits_made_in_code_are_held_to_the_same_rules(model_input):
    m = api.build_model(model_input)
    for bad, words in ((Edit("gain", levels=(1,), gain=float("nan")), "finite"),
                       (Edit("gain", levels=(1,), gain=float("inf")), "finite"),
                       (Edit("threshold", levels="details", rule="manual", value=None),
                        "must be a number"),
                       (Edit("region", levels=(1,), start_s=0.2, stop_s=0.1), "before"),
                       (Edit("gain", levels=(0,), gain=0), "not a level")):
        with pytest.raises(ScalesieveError, match=words):
            m.add_edit(bad)
    assert m.edits == ()   # nothing refused was kept
