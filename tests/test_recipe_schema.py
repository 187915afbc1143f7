"""The quick recipe check against the reference: jsonschema's Draft 2020-12 validator.

``recipe_schema.quick_valid`` walks a recipe by hand so that a valid one is read
without importing jsonschema.  It may only say True where the schema (run by
``jsonschema.Draft202012Validator``, the reference implementation of the draft)
finds no error; where it says False, jsonschema decides and words the message.
Checked here on recipes that are valid by construction (where the quick check
must also say True, or it would save nothing) and on recipes with every kind of
damage: wrong types, words, ranges, missing and extra keys, both levels and bands.
"""

from __future__ import annotations

import json
import math
import os
import subprocess
import sys

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from fuzz_budget import examples
from scalesieve import recipe_schema as rs
from scalesieve.core.thresholds import NOISE, RULES, SHAPES
from scalesieve.core.transforms import MODES
from scalesieve.errors import ScalesieveError
from scalesieve.recipe import from_json, loads

jsonschema = pytest.importorskip("jsonschema")
REFERENCE = jsonschema.Draft202012Validator(rs.schema())


def schema_accepts(doc) -> bool:
    return not any(True for _ in REFERENCE.iter_errors(doc))


# ------------------------------------------------------------------ valid recipes

level = st.integers(1, rs.MAX_LEVEL)
levels = st.one_of(st.sampled_from(rs.LEVEL_WORDS),
                   st.lists(st.one_of(level, st.just("a")), min_size=1, max_size=6))
bands = st.lists(st.sampled_from(["d1", "d3", "a8", "w4.6", "w3.0"]), min_size=1, max_size=4)
channels = st.lists(st.integers(0, rs.MAX_CHANNEL), min_size=1, max_size=3)


def number(key):
    lo, hi = rs.VALUE_RANGES[key]
    return st.one_of(st.floats(lo, hi, allow_nan=False), st.integers(int(lo), int(min(hi, 10**6))),
                     st.sampled_from([lo, hi]))


@st.composite
def valid_edit(draw):
    op = draw(st.sampled_from(rs.OPS))
    e = {"op": op}
    if draw(st.booleans()):
        e["levels"] = draw(levels)
    else:
        e["bands"] = draw(bands)
    if op == "gain":
        e["gain"] = draw(number("gain"))
    elif op == "threshold":
        e["rule"] = draw(st.sampled_from(RULES))
        if e["rule"] == "manual" or draw(st.booleans()):
            e["value"] = draw(number("value"))
        for key, words in (("shape", SHAPES), ("noise", NOISE)):
            if draw(st.booleans()):
                e[key] = draw(st.sampled_from(words))
        if draw(st.booleans()):
            e["scale"] = draw(number("scale"))
    else:
        e["start_s"] = draw(number("start_s"))
        e["stop_s"] = draw(number("stop_s"))
        if draw(st.booleans()):
            e["gain"] = draw(number("gain"))
    if draw(st.booleans()):
        e["channels"] = draw(channels)
    if draw(st.booleans()):
        e["enabled"] = draw(st.booleans())
    return e


@st.composite
def valid_transform(draw):
    choices = {
        "kind": st.sampled_from(["dwt", "swt", "packet"]),
        "wavelet": st.sampled_from(["db4", "sym8", "haar", "coif3", "not-a-wavelet"]),
        "level": st.one_of(st.none(), level),
        "mode": st.sampled_from(MODES),
        "basis": st.one_of(st.sampled_from(["full", "best"]),
                           st.lists(st.from_regex(r"\A[ad]{1,8}\Z"), min_size=1, max_size=4)),
        "cost": st.sampled_from(["shannon", "log-energy"]),
    }
    keys = draw(st.sets(st.sampled_from(sorted(choices))))
    return {k: draw(choices[k]) for k in sorted(keys)}


@st.composite
def valid_recipe(draw):
    doc = {"scalesieve_recipe": 1, "edits": draw(st.lists(valid_edit(), max_size=4))}
    if draw(st.booleans()):
        doc["transform"] = draw(valid_transform())
    return doc


@settings(max_examples=examples(300), suppress_health_check=[HealthCheck.too_slow])
@given(valid_recipe())
def test_a_valid_recipe_passes_the_quick_check_and_the_schema(doc):
    assert schema_accepts(doc)
    assert rs.quick_valid(doc)


# ------------------------------------------------------------------ damaged recipes

#: values that are wrong somewhere and right elsewhere, and the edge cases of types
ODD_VALUES = [None, True, False, 0, 1, -1, 2, 64, 65, 65535, 65536, 0.0, 1.0, 3.0, 2.5, -0.5,
              1e6, 1e6 + 1, 1e12, 1e100, 1e101, math.nan, math.inf, "", "a", "b", "ad", "ad\n",
              "dwt", "x" * 65, "details", "all", "gain", "threshold", "region", "manual",
              "soft", "finest", "full", "best", "shannon", "symmetric", [], [1], [0], ["a"],
              [1, "a"], [65], [True], ["ad", "da"], [1.0], {}, {"op": "gain"}]
KEYS = sorted(rs._COMMON_KEYS | set().union(*rs._OP_KEYS.values())) + ["extra", "Op"]
TRANSFORM_KEYS = ["kind", "wavelet", "level", "mode", "basis", "cost", "extra"]
odd = st.sampled_from(ODD_VALUES)


@st.composite
def damaged_recipe(draw):
    doc = draw(valid_recipe())
    for _ in range(draw(st.integers(1, 3))):
        where = draw(st.sampled_from(["edit", "edit", "edit", "transform", "top"]))
        edits = doc.get("edits")
        objects = [e for e in edits if isinstance(e, dict)] if isinstance(edits, list) else []
        if where == "edit" and objects:
            e = draw(st.sampled_from(objects))
            how = draw(st.sampled_from(["set", "set", "drop", "both"]))
            if how == "set":
                e[draw(st.sampled_from(KEYS))] = draw(odd)
            elif how == "drop" and e:
                e.pop(draw(st.sampled_from(sorted(e))))
            else:
                e["levels"], e["bands"] = [1], ["d1"]
        elif where == "edit" and isinstance(edits, list):
            edits.append(draw(odd))
        elif where == "transform":
            t = doc.setdefault("transform", {})
            if isinstance(t, dict) and draw(st.booleans()):
                t[draw(st.sampled_from(TRANSFORM_KEYS))] = draw(odd)
            else:
                doc["transform"] = draw(odd)
        else:
            key = draw(st.sampled_from(["scalesieve_recipe", "edits", "transform", "extra"]))
            if draw(st.booleans()):
                doc[key] = draw(odd)
            else:
                doc.pop(key, None)
    return doc


@settings(max_examples=examples(600), suppress_health_check=[HealthCheck.too_slow])
@given(damaged_recipe())
def test_the_quick_check_says_valid_only_where_the_schema_does(doc):
    if rs.quick_valid(doc):
        assert schema_accepts(doc), doc
    # either way, the schema's verdict is what from_json acts on
    assert (rs.first_error(doc) is None) == schema_accepts(doc)


@pytest.mark.parametrize("doc", [
    {"scalesieve_recipe": 1, "edits": [{"op": "gain", "levels": [1], "gain": True}]},
    {"scalesieve_recipe": 1, "edits": [{"op": "gain", "levels": [65], "gain": 0}]},
    {"scalesieve_recipe": 1, "edits": [{"op": "gain", "levels": [], "gain": 0}]},
    {"scalesieve_recipe": 1, "edits": [{"op": "gain", "gain": 0}]},
    {"scalesieve_recipe": 1, "edits": [{"op": "gain", "levels": [1], "bands": ["d1"], "gain": 0}]},
    {"scalesieve_recipe": 1, "edits": [{"op": "gain", "levels": [1], "gain": 1e6 + 1}]},
    {"scalesieve_recipe": 1, "edits": [{"op": "gain", "levels": [1], "gain": 0, "rule": "sure"}]},
    {"scalesieve_recipe": 1, "edits": [{"op": "threshold", "levels": "all", "rule": "manual"}]},
    {"scalesieve_recipe": 1, "edits": [{"op": "region", "levels": [1], "start_s": 0}]},
    {"scalesieve_recipe": 1, "edits": [{"op": "gain", "levels": [1], "gain": 0,
                                        "channels": [65536]}]},
    {"scalesieve_recipe": 1, "edits": [], "transform": {"kind": "wavelet"}},
    {"scalesieve_recipe": 1, "edits": [], "transform": {"basis": ["adx"]}},
    {"scalesieve_recipe": 1, "edits": [], "transform": {"level": 0}},
    {"scalesieve_recipe": 1, "edits": [], "note": "x"},
    {"scalesieve_recipe": 1},
])
def test_damage_the_schema_refuses_is_never_passed_quickly(doc):
    assert not schema_accepts(doc)
    assert not rs.quick_valid(doc)
    assert rs.first_error(doc) is not None


@pytest.mark.parametrize("doc", [
    # the schema allows these; the quick check leaves them to it (and so does not decide)
    {"scalesieve_recipe": 1, "edits": [{"op": "gain", "levels": [3.0], "gain": 0}]},
    {"scalesieve_recipe": 1, "edits": [], "transform": {"basis": ["ad\n"]}},
])
def test_what_the_quick_check_is_unsure_of_goes_to_the_schema(doc):
    assert schema_accepts(doc)
    assert not rs.quick_valid(doc)
    assert rs.first_error(doc) is None
    from_json(doc)                       # read, as before


def test_the_shipped_recipes_pass_the_quick_check():
    folder = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))),
                          "docs", "recipes")
    names = sorted(n for n in os.listdir(folder) if n.endswith(".json"))
    assert names
    for name in names:
        with open(os.path.join(folder, name), encoding="utf-8") as fh:
            doc = json.load(fh)
        assert schema_accepts(doc) and rs.quick_valid(doc), name


def test_a_valid_recipe_is_read_without_jsonschema_and_a_bad_one_names_its_fault():
    code = (
        "import sys\n"
        "from scalesieve.recipe import loads\n"
        "loads('{\"scalesieve_recipe\": 1, \"edits\": [{\"op\": \"threshold\", "
        "\"levels\": \"details\", \"rule\": \"universal\"}]}')\n"
        "print('jsonschema' in sys.modules)\n")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=120)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "False"
    with pytest.raises(ScalesieveError, match=r"edit 1 \(gain\) key 'gain': .*above the maximum"):
        loads(json.dumps({"scalesieve_recipe": 1,
                          "edits": [{"op": "gain", "levels": [1], "gain": 2e6}]}), "r.json")
