"""The version-1 recipe file's keys, ranges and schema, and the checks that read them.

A recipe file is checked against a JSON Schema (Draft 2020-12, :func:`schema`).
Most recipes are valid, and importing and running ``jsonschema`` costs a short
command more than its work (about 60 ms of a ``clean``), so :func:`quick_valid`
first walks the recipe by hand over the same tables: it says True only for a
recipe the schema accepts, and anything it is not sure of goes to jsonschema,
whose first error becomes the message (:func:`first_error`).  A test holds the
two to each other on valid and invalid recipes.
"""

from __future__ import annotations

import json
import re
from typing import Any

from scalesieve.core.thresholds import NOISE, RULES, SHAPES
from scalesieve.core.transforms import MODES

RECIPE_VERSION = 1
OPS = ("gain", "threshold", "region")
LEVEL_WORDS = ("details", "all")

_COMMON_KEYS = {"op", "levels", "bands", "channels", "enabled"}
_OP_KEYS = {
    "gain": {"gain"},
    "threshold": {"rule", "shape", "noise", "value", "scale"},
    "region": {"start_s", "stop_s", "gain"},
}
_REQUIRED = {"gain": {"gain"}, "threshold": {"rule"}, "region": {"start_s", "stop_s"}}
#: longest list of band names one edit may carry (a packet tree to depth 12 has 4096)
MAX_BAND_NAMES = 1 << 16
#: Most edits one recipe may hold (each is replayed on every channel).
MAX_EDITS = 10_000
#: Ranges of the numeric keys (inclusive); a recipe outside them is refused.
#: Gains and scales beyond a million only blow a band up; times are seconds
#: from the start of the recording.
VALUE_RANGES = {
    "gain": (0.0, 1e6),
    "scale": (0.0, 1e6),
    "value": (0.0, 1e100),
    "start_s": (0.0, 1e12),
    "stop_s": (0.0, 1e12),
}
#: A level beyond this would need more than 2**64 samples.
MAX_LEVEL = 64
MAX_CHANNEL = 65535


def short_text(text: str, limit: int = 80) -> str:
    """A value quoted in a message, cut so the message stays one readable line."""
    text = " ".join(str(text).split())
    return text if len(text) <= limit else text[:limit - 1] + "…"


def schema() -> dict:
    """The version-1 recipe as a JSON Schema (Draft 2020-12), built from the tables above."""
    level = {"type": "integer", "minimum": 1, "maximum": MAX_LEVEL}
    return {
        "type": "object",
        "required": ["scalesieve_recipe", "edits"],
        "additionalProperties": False,
        "properties": {
            "scalesieve_recipe": {"const": RECIPE_VERSION},
            "transform": {
                "type": "object", "additionalProperties": False,
                "properties": {
                    "kind": {"enum": ["dwt", "swt", "packet"]},
                    "wavelet": {"type": "string"},
                    "level": {"anyOf": [level, {"type": "null"}]},
                    "mode": {"enum": list(MODES)},
                    "basis": {"anyOf": [{"enum": ["full", "best"]},
                                        {"type": "array", "minItems": 1, "maxItems": 1 << 16,
                                         "items": {"type": "string",
                                                   "pattern": "^[ad]{1,64}$"}}]},
                    "cost": {"enum": ["shannon", "log-energy"]},
                },
            },
            "edits": {"type": "array", "maxItems": MAX_EDITS, "items": edit_schema()},
        },
    }


def edit_schema() -> dict:
    """One edit of a version-1 recipe: its keys by op, their types and ranges."""
    def num(key):
        lo, hi = VALUE_RANGES[key]
        return {"type": "number", "minimum": lo, "maximum": hi}

    level = {"type": "integer", "minimum": 1, "maximum": MAX_LEVEL}
    level_list = {"type": "array", "minItems": 1, "maxItems": MAX_LEVEL + 1,
                  "items": {"anyOf": [level, {"const": "a"}]}}
    by_op = [{"if": {"properties": {"op": {"const": op}}, "required": ["op"]},
              "then": {"required": sorted(_REQUIRED[op]),
                       "propertyNames": {"enum": sorted(_COMMON_KEYS | _OP_KEYS[op])},
                       # levels or bands, not both
                       "oneOf": [{"required": ["levels"], "not": {"required": ["bands"]}},
                                 {"required": ["bands"], "not": {"required": ["levels"]}}]}}
             for op in OPS]
    by_op.append({"if": {"properties": {"op": {"const": "threshold"},
                                        "rule": {"const": "manual"}},
                         "required": ["op", "rule"]},
                  "then": {"required": ["value"]}})
    return {"type": "object",
                "required": ["op"],
                "allOf": by_op,
                "properties": {
                    "op": {"enum": list(OPS)},
                    "levels": {"anyOf": [level_list, {"enum": list(LEVEL_WORDS)}]},
                    "bands": {"type": "array", "minItems": 1, "maxItems": MAX_BAND_NAMES,
                              "items": {"type": "string", "maxLength": 64}},
                    "channels": {"type": "array", "minItems": 1, "maxItems": MAX_CHANNEL + 1,
                                 "items": {"type": "integer", "minimum": 0,
                                           "maximum": MAX_CHANNEL}},
                    "enabled": {"type": "boolean"},
                    "gain": num("gain"),
                    "rule": {"enum": list(RULES)},
                    "shape": {"enum": list(SHAPES)},
                    "noise": {"enum": list(NOISE)},
                    "value": num("value"),
                    "scale": num("scale"),
                    "start_s": num("start_s"),
                    "stop_s": num("stop_s"),
                }}


def _where(path, data=None) -> str:
    parts = list(path)
    if len(parts) >= 2 and parts[0] == "edits" and isinstance(parts[1], int):
        rest = ".".join(str(x) for x in parts[2:])
        op = None
        try:
            op = data["edits"][parts[1]].get("op") if data is not None else None
        except (AttributeError, IndexError, KeyError, TypeError):
            pass
        head = f"edit {parts[1] + 1}" + (f" ({op})" if isinstance(op, str) and op in OPS
                                          else "")
        return head + (f" key '{rest}'" if rest else "")
    return "key '" + ".".join(str(x) for x in parts) + "'" if parts else "recipe"


_VALIDATORS: dict = {}


def _validator(document: dict):
    """A cached Draft 2020-12 validator (jsonschema is imported only when one is needed)."""
    import jsonschema  # only when the quick check is not sure: keeps commands quick

    key = json.dumps(document, sort_keys=True)
    if key not in _VALIDATORS:
        _VALIDATORS[key] = jsonschema.Draft202012Validator(document)
    return _VALIDATORS[key]


def _schema_message(er) -> str:
    """jsonschema's message with the offending value shortened."""
    value = short_text(repr(er.instance), 60)
    v = er.validator
    path = [str(p) for p in er.absolute_path]
    if v == "required":
        missing = [k for k in er.validator_value if k not in er.instance]
        if missing == ["value"]:
            return "rule 'manual' needs a 'value'"
        return f"missing key '{missing[0]}'" if missing else short_text(er.message, 160)
    if v == "additionalProperties":
        known = sorted(er.schema.get("properties", {}))
        extra = [k for k in er.instance if k not in known]
        return (f"unknown key {short_text(repr(extra[0]), 60)} (known: {', '.join(known)})"
                if extra else short_text(er.message, 160))
    if v == "propertyNames" or "propertyNames" in er.relative_schema_path:
        known = er.validator_value if v == "enum" else er.schema["propertyNames"]["enum"]
        return f"unknown key {short_text(repr(er.instance), 60)} (known: {', '.join(known)})"
    if v == "oneOf" and isinstance(er.instance, dict):
        if "levels" in er.instance and "bands" in er.instance:
            return "give 'levels' or 'bands', not both"
        return "missing key 'levels' (or 'bands')"
    if v == "enum" and path and path[-1] == "op":
        return f"unknown op {value} (known: {', '.join(OPS)})"
    if v == "type" and er.instance is None and er.validator_value == "number":
        return "must be a number, not None"
    if v == "type":
        return f"{value} is not of type {er.validator_value!r}"
    if v == "enum":
        return f"{value} is not one of {', '.join(map(str, er.validator_value))}"
    if v == "const":
        return f"{value} is not {er.validator_value!r}"
    if v in ("minimum", "maximum"):
        word = "below the minimum" if v == "minimum" else "above the maximum"
        return f"{value} is {word} of {er.validator_value:g}"
    if v == "anyOf" and "levels" in path:
        return (f"{value} is not a level (1 to {MAX_LEVEL}), 'a', a list of them, "
                "'details' or 'all'")
    if v == "anyOf":
        return f"{value} is not an allowed value"
    if v in ("maxItems", "minItems"):
        if v == "maxItems":
            return (f"holds {len(er.instance)} items; at most {er.validator_value} are "
                    "allowed")
        return f"has fewer than {er.validator_value} items"
    return short_text(er.message, 160)

# --------------------------------------------------------------------------
# the quick check: True only when the schema accepts the recipe

_TOP_KEYS = frozenset({"scalesieve_recipe", "transform", "edits"})
_TRANSFORM_KEYS = frozenset({"kind", "wavelet", "level", "mode", "basis", "cost"})
_KINDS = ("dwt", "swt", "packet")
_BASES = ("full", "best")
_COSTS = ("shannon", "log-energy")
_PATH = re.compile("[ad]{1,64}")
_ALLOWED = {op: frozenset(_COMMON_KEYS | _OP_KEYS[op]) for op in OPS}
_WORDS = {"rule": RULES, "shape": SHAPES, "noise": NOISE}


def _word(v, allowed) -> bool:
    return type(v) is str and v in allowed


def _whole(v, lo: int, hi: int) -> bool:
    # JSON integers only (a bool is not one; 3.0 is left to the schema)
    return type(v) is int and lo <= v <= hi


def _number(v, key: str) -> bool:
    lo, hi = VALUE_RANGES[key]
    return type(v) in (int, float) and lo <= v <= hi      # NaN fails: left to the schema


def _quick_transform(t) -> bool:
    if type(t) is not dict or not _TRANSFORM_KEYS.issuperset(t):
        return False
    if "kind" in t and not _word(t["kind"], _KINDS):
        return False
    if "wavelet" in t and type(t["wavelet"]) is not str:
        return False
    if "level" in t and t["level"] is not None and not _whole(t["level"], 1, MAX_LEVEL):
        return False
    if "mode" in t and not _word(t["mode"], MODES):
        return False
    if "cost" in t and not _word(t["cost"], _COSTS):
        return False
    if "basis" in t:
        b = t["basis"]
        if type(b) is list:
            if not 1 <= len(b) <= 1 << 16:
                return False
            return all(type(p) is str and _PATH.fullmatch(p) is not None for p in b)
        return _word(b, _BASES)
    return True


def _quick_levels(v) -> bool:
    if type(v) is str:
        return v in LEVEL_WORDS
    if type(v) is not list or not 1 <= len(v) <= MAX_LEVEL + 1:
        return False
    return all(_whole(k, 1, MAX_LEVEL) or (type(k) is str and k == "a") for k in v)


def _quick_edit(e) -> bool:
    if type(e) is not dict:
        return False
    op = e.get("op")
    if type(op) is not str or op not in _ALLOWED:
        return False
    if not _ALLOWED[op].issuperset(e) or not _REQUIRED[op].issubset(e):
        return False
    if ("levels" in e) == ("bands" in e):
        return False                      # levels or bands, exactly one
    for key, v in e.items():
        if key == "op":
            continue
        if key == "levels":
            ok = _quick_levels(v)
        elif key == "bands":
            ok = (type(v) is list and 1 <= len(v) <= MAX_BAND_NAMES
                  and all(type(b) is str and len(b) <= 64 for b in v))
        elif key == "channels":
            ok = (type(v) is list and 1 <= len(v) <= MAX_CHANNEL + 1
                  and all(_whole(k, 0, MAX_CHANNEL) for k in v))
        elif key == "enabled":
            ok = type(v) is bool
        elif key in _WORDS:
            ok = _word(v, _WORDS[key])
        else:
            ok = _number(v, key)
        if not ok:
            return False
    return not (op == "threshold" and e.get("rule") == "manual" and "value" not in e)


def quick_valid(data: Any) -> bool:
    """True only when :func:`schema` accepts ``data``; False: ask :func:`first_error`.

    Exact types only (``int``, ``float``, ``str``, ``bool``, ``list``, ``dict``,
    as ``json`` makes them): anything else, and every doubtful case, is False.
    """
    if type(data) is not dict or not _TOP_KEYS.issuperset(data) or "edits" not in data:
        return False
    if not _whole(data.get("scalesieve_recipe"), RECIPE_VERSION, RECIPE_VERSION):
        return False
    if "transform" in data and not _quick_transform(data["transform"]):
        return False
    edits = data["edits"]
    if type(edits) is not list or len(edits) > MAX_EDITS:
        return False
    return all(_quick_edit(e) for e in edits)


def first_error(data: Any) -> str | None:
    """The schema's first complaint about ``data`` as one line, or None when it has none.

    The same line whether or not :func:`quick_valid` ran first: errors sorted by
    where they are, the first one put in the recipe's words.
    """
    errors = sorted(_validator(schema()).iter_errors(data),
                    key=lambda er: [str(p) for p in er.absolute_path])
    if not errors:
        return None
    er = errors[0]
    return f"{_where(er.absolute_path, data)}: {_schema_message(er)}"
