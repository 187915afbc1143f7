"""The Recipe: an ordered list of edits plus the transform it was made for.

Version 1 of the file format is fixed by shared/CONTRACT.md.  A recipe is
data: JSON only, checked against a schema, every value range-checked, and
every problem reported with the edit number and the key it is in.
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import dataclass, field, replace
from typing import Any, Iterable

from scalesieve.core.thresholds import NOISE, RULES, SHAPES
from scalesieve.core.transforms import MODES, TransformSpec, discrete_wavelets
from scalesieve.errors import ScalesieveError

RECIPE_VERSION = 1
OPS = ("gain", "threshold", "region")
LEVEL_WORDS = ("details", "all")

_COMMON_KEYS = {"op", "levels", "channels", "enabled"}
_OP_KEYS = {
    "gain": {"gain"},
    "threshold": {"rule", "shape", "noise", "value", "scale"},
    "region": {"start_s", "stop_s", "gain"},
}
_REQUIRED = {"gain": {"levels", "gain"}, "threshold": {"levels", "rule"},
             "region": {"levels", "start_s", "stop_s"}}

# Largest recipe file we read: a recipe is a short list of edits.
MAX_RECIPE_BYTES = 8 * 1024 * 1024


@dataclass(frozen=True)
class Edit:
    """One edit.  ``levels`` is as written: a tuple of ints and ``"a"``, or a word."""

    op: str
    levels: Any = "details"
    gain: float = 0.0
    rule: str = "universal"
    shape: str = "soft"
    noise: str = "finest"
    value: float | None = None
    scale: float = 1.0
    start_s: float = 0.0
    stop_s: float = 0.0
    channels: tuple[int, ...] | None = None
    enabled: bool = True

    def __post_init__(self):
        if isinstance(self.levels, list):
            object.__setattr__(self, "levels", tuple(self.levels))
        if isinstance(self.channels, list):
            object.__setattr__(self, "channels", tuple(self.channels))

    def applies_to(self, channel: int) -> bool:
        return self.enabled and (self.channels is None or channel in self.channels)

    def band_keys(self, level: int) -> list:
        return resolve_levels(self.levels, level)

    def to_json(self) -> dict:
        d: dict[str, Any] = {"op": self.op}
        d["levels"] = self.levels if isinstance(self.levels, str) else list(self.levels)
        if self.op == "gain":
            d["gain"] = self.gain
        elif self.op == "threshold":
            d["rule"] = self.rule
            if self.rule == "manual":
                d["value"] = self.value
            d["shape"] = self.shape
            d["noise"] = self.noise
            if self.scale != 1.0:
                d["scale"] = self.scale
        else:
            d["start_s"] = self.start_s
            d["stop_s"] = self.stop_s
            d["gain"] = self.gain
        if self.channels is not None:
            d["channels"] = list(self.channels)
        if not self.enabled:
            d["enabled"] = False
        return d

    def summary(self) -> str:
        """A short line for lists and logs."""
        lv = self.levels if isinstance(self.levels, str) else ",".join(str(v) for v in self.levels)
        if self.op == "gain":
            return f"gain ×{self.gain:g} on {lv}"
        if self.op == "threshold":
            what = f"{self.value:g}" if self.rule == "manual" else self.rule
            sc = f" ×{self.scale:g}" if self.scale != 1.0 else ""
            return f"threshold {what}{sc} {self.shape} ({self.noise} noise) on {lv}"
        return f"region {self.start_s:g}–{self.stop_s:g} s ×{self.gain:g} on {lv}"


@dataclass
class Recipe:
    transform: TransformSpec | None = None
    edits: tuple[Edit, ...] = field(default_factory=tuple)

    def to_json(self) -> dict:
        d: dict[str, Any] = {"scalesieve_recipe": RECIPE_VERSION}
        if self.transform is not None:
            d["transform"] = self.transform.to_json()
        d["edits"] = [e.to_json() for e in self.edits]
        return d

    def dumps(self) -> str:
        return json.dumps(self.to_json(), indent=1)


# --------------------------------------------------------------------------
# levels


def parse_levels(text: str) -> Any:
    """Parse a LEVELS argument: ``1,2``, ``1-3``, ``details``, ``all``, ``a``."""
    t = str(text).strip().lower()
    if t in LEVEL_WORDS:
        return t
    out: list = []
    for part in t.split(","):
        part = part.strip()
        if not part:
            raise ValueError(f"empty entry in levels {text!r}")
        if part == "a" or (part.startswith("a") and part[1:].isdigit()):
            out.append("a")
        elif "-" in part:
            lo, _, hi = part.partition("-")
            try:
                lo_i, hi_i = int(lo.lstrip("d")), int(hi.lstrip("d"))
            except ValueError:
                raise ValueError(f"levels {text!r}: {part!r} is not a range like 1-3") from None
            if lo_i > hi_i or lo_i < 1:
                raise ValueError(f"levels {text!r}: range {part!r} is empty or below 1")
            out.extend(range(lo_i, hi_i + 1))
        else:
            try:
                v = int(part.lstrip("d"))
            except ValueError:
                raise ValueError(
                    f"levels {text!r}: {part!r} is not a level number, a range, 'a', "
                    f"'details' or 'all'") from None
            if v < 1:
                raise ValueError(f"levels {text!r}: level {v} is below 1")
            out.append(v)
    seen: list = []
    for v in out:
        if v not in seen:
            seen.append(v)
    return tuple(seen)


def resolve_levels(levels: Any, level: int) -> list:
    """Band keys named by ``levels`` for a transform of depth ``level``."""
    if levels == "details":
        return list(range(1, level + 1))
    if levels == "all":
        return list(range(1, level + 1)) + ["a"]
    keys = []
    for v in levels:
        if v == "a":
            keys.append("a")
        else:
            if v > level:
                raise ValueError(
                    f"level {v} is not in the transform (it has detail levels 1-{level} and a)")
            keys.append(int(v))
    return keys


def check_against(recipe_edits: Iterable[Edit], level: int, duration_s: float | None = None,
                  channels: int | None = None, source: str | None = None) -> None:
    """Check edits against a resolved transform and recording; raise naming the edit."""
    for i, e in enumerate(recipe_edits, 1):
        try:
            resolve_levels(e.levels, level)
        except ValueError as exc:
            raise ScalesieveError(f"edit {i} ({e.op}): {exc}", source) from None
        if channels is not None and e.channels is not None:
            for k in e.channels:
                if k >= channels:
                    raise ScalesieveError(
                        f"edit {i} ({e.op}): channel {k} is not in the recording "
                        f"(channels 0-{channels - 1})", source)
        if e.op == "region" and duration_s is not None:
            if e.start_s > duration_s or e.stop_s < 0:
                raise ScalesieveError(
                    f"edit {i} (region): {e.start_s:g}-{e.stop_s:g} s lies outside the "
                    f"recording (0-{duration_s:g} s)", source)


# --------------------------------------------------------------------------
# reading and validating


def _schema() -> dict:
    num = {"type": "number"}
    level_list = {"type": "array", "minItems": 1,
                  "items": {"anyOf": [{"type": "integer", "minimum": 1}, {"const": "a"}]}}
    return {
        "type": "object",
        "required": ["scalesieve_recipe", "edits"],
        "additionalProperties": False,
        "properties": {
            "scalesieve_recipe": {"const": RECIPE_VERSION},
            "transform": {
                "type": "object", "additionalProperties": False,
                "properties": {
                    "kind": {"enum": ["dwt", "swt"]},
                    "wavelet": {"type": "string"},
                    "level": {"anyOf": [{"type": "integer", "minimum": 1}, {"type": "null"}]},
                    "mode": {"enum": list(MODES)},
                },
            },
            "edits": {"type": "array", "items": {
                "type": "object",
                "required": ["op", "levels"],
                "properties": {
                    "op": {"enum": list(OPS)},
                    "levels": {"anyOf": [level_list, {"enum": list(LEVEL_WORDS)}]},
                    "channels": {"type": "array", "minItems": 1,
                                 "items": {"type": "integer", "minimum": 0}},
                    "enabled": {"type": "boolean"},
                    "gain": {**num, "minimum": 0, "maximum": 1e6},
                    "rule": {"enum": list(RULES)},
                    "shape": {"enum": list(SHAPES)},
                    "noise": {"enum": list(NOISE)},
                    "value": {**num, "minimum": 0},
                    "scale": {**num, "minimum": 0, "maximum": 1e6},
                    "start_s": num,
                    "stop_s": num,
                },
            }},
        },
    }


def _reject_constant(name: str):
    raise ValueError(f"{name} is not a number JSON allows")


def loads(text: str, source: str | None = None) -> Recipe:
    """Parse recipe JSON text; every problem is a ScalesieveError naming it."""
    try:
        data = json.loads(text, parse_constant=_reject_constant)
    except ValueError as exc:
        line = getattr(exc, "lineno", None)
        msg = exc.msg if hasattr(exc, "msg") else str(exc)
        raise ScalesieveError(f"not a recipe: invalid JSON ({msg})", source, line) from None
    return from_json(data, source)


def load(path: str | os.PathLike) -> Recipe:
    p = os.fspath(path)
    try:
        size = os.path.getsize(p)
        if size > MAX_RECIPE_BYTES:
            raise ScalesieveError(f"recipe file is {size} bytes; a recipe is at most "
                                  f"{MAX_RECIPE_BYTES} bytes", p)
        with open(p, "rb") as fh:
            raw = fh.read()
    except FileNotFoundError:
        raise ScalesieveError("recipe file not found", p) from None
    except IsADirectoryError:
        raise ScalesieveError("is a folder, not a recipe file", p) from None
    except PermissionError:
        raise ScalesieveError("permission denied", p) from None
    except OSError as exc:
        raise ScalesieveError(f"cannot read recipe: {exc.strerror or exc}", p) from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise ScalesieveError("not a recipe: the file is not UTF-8 JSON text", p) from None
    return loads(text, p)


def _where(path) -> str:
    parts = list(path)
    if len(parts) >= 2 and parts[0] == "edits" and isinstance(parts[1], int):
        rest = ".".join(str(x) for x in parts[2:])
        return f"edit {parts[1] + 1}" + (f" key '{rest}'" if rest else "")
    return "key '" + ".".join(str(x) for x in parts) + "'" if parts else "recipe"


def from_json(data: Any, source: str | None = None) -> Recipe:
    if not isinstance(data, dict) or "scalesieve_recipe" not in data:
        raise ScalesieveError("not a Scalesieve recipe (no \"scalesieve_recipe\": 1 key)", source)
    if data.get("scalesieve_recipe") != RECIPE_VERSION:
        raise ScalesieveError(
            f"recipe version {data.get('scalesieve_recipe')!r} is not supported "
            f"(this program reads version {RECIPE_VERSION})", source)
    for key in data:
        if key not in ("scalesieve_recipe", "transform", "edits"):
            raise ScalesieveError(f"unknown key '{key}' in recipe", source)
    edits_raw = data.get("edits")
    if not isinstance(edits_raw, list):
        raise ScalesieveError("recipe key 'edits' must be a list of edits", source)
    # Named checks first: they give plainer messages than the schema.
    for i, e in enumerate(edits_raw, 1):
        if not isinstance(e, dict):
            raise ScalesieveError(f"edit {i} is not an object", source)
        op = e.get("op")
        if op not in OPS:
            raise ScalesieveError(f"edit {i}: unknown op {op!r} (known: {', '.join(OPS)})", source)
        allowed = _COMMON_KEYS | _OP_KEYS[op]
        for key in e:
            if key not in allowed:
                raise ScalesieveError(f"edit {i} ({op}): unknown key '{key}'", source)
        for key in sorted(_REQUIRED[op]):
            if key not in e:
                raise ScalesieveError(f"edit {i} ({op}): missing key '{key}'", source)
        for key, v in e.items():
            if isinstance(v, float) and not math.isfinite(v):
                raise ScalesieveError(f"edit {i} ({op}): '{key}' must be finite", source)
        if op == "threshold" and e.get("rule") == "manual" and "value" not in e:
            raise ScalesieveError(f"edit {i} (threshold): rule 'manual' needs a 'value'", source)
    import jsonschema  # only when a recipe is read: keeps small commands quick

    validator = jsonschema.Draft202012Validator(_schema())
    errors = sorted(validator.iter_errors(data), key=lambda er: list(er.absolute_path))
    if errors:
        er = errors[0]
        raise ScalesieveError(f"{_where(er.absolute_path)}: {er.message}", source)
    spec = None
    if "transform" in data:
        t = data["transform"]
        spec = TransformSpec(kind=t.get("kind", "dwt"), wavelet=t.get("wavelet", "db4"),
                             level=t.get("level"), mode=t.get("mode", "symmetric"))
        if spec.wavelet not in discrete_wavelets():
            raise ScalesieveError(
                f"key 'transform.wavelet': {spec.wavelet!r} is not a discrete PyWavelets wavelet",
                source)
    edits = []
    for i, e in enumerate(edits_raw, 1):
        kw = dict(e)
        if e["op"] == "region" and kw["start_s"] >= kw["stop_s"]:
            raise ScalesieveError(
                f"edit {i} (region): start_s {kw['start_s']:g} must be before stop_s "
                f"{kw['stop_s']:g}", source)
        if e["op"] == "region":
            kw.setdefault("gain", 0.0)
        for fkey in ("gain", "value", "scale", "start_s", "stop_s"):
            if fkey in kw and kw[fkey] is not None:
                kw[fkey] = float(kw[fkey])
        edits.append(Edit(**kw))
    return Recipe(spec, tuple(edits))


def save(recipe: Recipe, path: str | os.PathLike, force: bool = False, protect=()) -> None:
    from scalesieve.io.writers import write_json

    write_json(path, recipe.to_json(), force=force)


def with_edits(recipe: Recipe, edits: Iterable[Edit]) -> Recipe:
    return replace(recipe, edits=tuple(edits))
