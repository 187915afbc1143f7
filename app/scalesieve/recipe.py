"""The Recipe: an ordered list of edits plus the transform it was made for.

Version 1 of the file format is fixed by docs/reference.md.  A recipe is
data: JSON only, checked against a schema, every value range-checked, and
every problem reported with the edit number and the key it is in.
"""

from __future__ import annotations

import json
import math
import os
import stat
from dataclasses import dataclass, field, replace
from typing import Any, Iterable

from scalesieve.core.thresholds import NOISE, RULES, SHAPES
from scalesieve.core.transforms import TransformSpec, discrete_wavelets
from scalesieve.errors import ScalesieveError
# The file's keys and ranges live beside its schema; these names stay importable here.
from scalesieve.recipe_schema import (_COMMON_KEYS, _OP_KEYS, _REQUIRED,  # noqa: F401
                                      LEVEL_WORDS, MAX_BAND_NAMES, MAX_CHANNEL, MAX_EDITS,
                                      MAX_LEVEL, OPS, RECIPE_VERSION, VALUE_RANGES)
from scalesieve import recipe_schema
from scalesieve.recipe_schema import short_text as _short


# Largest recipe file we read: a recipe is a short list of edits.
MAX_RECIPE_BYTES = 8 * 1024 * 1024
# A version-1 recipe nests four deep (recipe, edits, edit, levels); deeper is not one.
_MAX_DEPTH = 16


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
    #: band names as ``bands --json`` lists them ("d3", "a8", "w4.6"); used instead of levels
    bands: tuple[str, ...] | None = None

    def __post_init__(self):
        if isinstance(self.bands, list):
            object.__setattr__(self, "bands", tuple(self.bands))
        lv = self.levels
        if isinstance(lv, (list, tuple)) and lv and all(hasattr(v, "path") for v in lv):
            # packet band keys given as levels (views pass the keys they show): by name
            object.__setattr__(self, "bands", tuple(v.name for v in lv))
            object.__setattr__(self, "levels", "details")
        if isinstance(self.levels, list):
            object.__setattr__(self, "levels", tuple(self.levels))
        if isinstance(self.channels, list):
            object.__setattr__(self, "channels", tuple(self.channels))

    def applies_to(self, channel: int) -> bool:
        return self.enabled and (self.channels is None or channel in self.channels)

    def band_keys(self, level) -> list:
        """Band keys this edit names; ``level`` is a depth or a resolved TransformSpec."""
        return resolve_bands(self, level)

    def to_json(self) -> dict:
        d: dict[str, Any] = {"op": self.op}
        if self.bands is not None:
            d["bands"] = list(self.bands)
        else:
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
        lv = ",".join(self.bands) if self.bands is not None else self.levels if isinstance(self.levels, str) else ",".join(str(v) for v in self.levels)
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


def resolve_bands(edit: "Edit", spec) -> list:
    """Band keys an edit names, for a depth (DWT/SWT) or a resolved TransformSpec.

    Packet transforms: ``details`` is every packet band but the lowest (the
    all-approximation node, as the DWT's approximation), ``all`` every band;
    level numbers name nothing there (name bands instead).
    """
    from scalesieve.core import transforms as tf

    if isinstance(spec, TransformSpec):
        if spec.kind == "packet" and spec.basis == "best":
            # the tiling is chosen from the data: names are checked once it is
            if edit.bands is None and edit.levels not in LEVEL_WORDS:
                raise ValueError("a packet transform has no detail levels; name its bands "
                                 "(\"bands\": [\"w3.5\", ...])")
            return []
        if edit.bands is not None:
            return [tf.key_named(spec, name) for name in edit.bands]
        if spec.kind == "packet":
            keys = tf.table_keys(spec)
            if edit.levels == "all":
                return keys
            if edit.levels == "details":
                return [k for k in keys if set(k.path) != {"a"}]
            raise ValueError("a packet transform has no detail levels; name its bands "
                             "(\"bands\": [\"w3.5\", ...])")
        return resolve_levels(edit.levels, spec.level)
    if edit.bands is not None:
        from scalesieve.core import transforms as tf

        return [tf.key_named(TransformSpec(level=int(spec)), name) for name in edit.bands]
    return resolve_levels(edit.levels, spec)


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





def _num(v) -> str:
    return f"{v:g}" if isinstance(v, (int, float)) else _short(repr(v))


def check_edit(e: Edit, index: int = 1, source: str | None = None) -> None:
    """Check one edit made in code or in the window: op, words, finite numbers in range,
    levels, channels, then :func:`check_cross_fields`.

    The model calls this (through :func:`check_against`) for every edit it is
    given, so edits made in code are held to the rules a recipe file meets.  A
    recipe file is checked by the schema instead (:func:`from_json`); this
    reads the same tables the schema is built from (``OPS``, ``VALUE_RANGES``,
    ``RULES``, ``SHAPES``, ``NOISE``, ``LEVEL_WORDS``, ``MAX_*``), by hand, because
    a schema validation costs about 170 µs an edit (10 000 edits: 1.7 s
    against 0.02 s), and it also refuses what JSON cannot carry (NaN, infinities).

    Raises
    ------
    ScalesieveError
        Naming the edit (1-based ``index``), its op and the key.
    """
    if not (isinstance(e.op, str) and e.op in OPS):
        raise ScalesieveError(f"edit {index}: unknown op {_short(repr(e.op), 60)} "
                              f"(known: {', '.join(OPS)})", source)
    where = f"edit {index} ({e.op})"
    used = {"gain": ("gain", "region"), "scale": ("threshold",),
            "value": ("threshold",), "start_s": ("region",), "stop_s": ("region",)}
    for key, (lo, hi) in VALUE_RANGES.items():
        if e.op not in used[key] or (key == "value" and e.rule != "manual"):
            continue
        raw = getattr(e, key)
        if isinstance(raw, bool) or raw is None:
            v = None
        else:
            try:
                v = float(raw)
            except (TypeError, ValueError, OverflowError):
                v = None
        if v is None:
            raise ScalesieveError(f"{where}: '{key}' must be a number, not "
                                  f"{_short(repr(raw), 40)}", source)
        if not math.isfinite(v):
            raise ScalesieveError(f"{where}: '{key}' must be a finite number, not {v!r}",
                                  source)
        if not lo <= v <= hi:
            raise ScalesieveError(f"{where}: '{key}' {_num(v)} is outside the allowed range "
                                  f"{_num(lo)} to {_num(hi)}", source)
    if e.op == "threshold":
        for key, allowed in (("rule", RULES), ("shape", SHAPES), ("noise", NOISE)):
            if getattr(e, key) not in allowed:
                raise ScalesieveError(f"{where}: '{key}' {_short(repr(getattr(e, key)), 40)} "
                                      f"is not one of {', '.join(allowed)}", source)
    if e.bands is not None:
        if isinstance(e.bands, str) or not isinstance(e.bands, tuple) or not e.bands:
            raise ScalesieveError(f"{where}: 'bands' must be a non-empty list of band names",
                                  source)
        if len(e.bands) > MAX_BAND_NAMES:
            raise ScalesieveError(f"{where}: 'bands' names more than {MAX_BAND_NAMES} bands",
                                  source)
        for b in e.bands:
            if not isinstance(b, str):
                raise ScalesieveError(f"{where}: band {_short(repr(b), 40)} is not a band name "
                                      "(d3, a8, w4.6, ...)", source)
    elif isinstance(e.levels, str):
        if e.levels not in LEVEL_WORDS:
            raise ScalesieveError(f"{where}: levels {_short(repr(e.levels), 40)} is not a list "
                                  "of levels, 'details' or 'all'", source)
    else:
        try:
            items = list(e.levels)
        except TypeError:
            raise ScalesieveError(f"{where}: levels {_short(repr(e.levels), 40)} is not a list "
                                  "of levels", source) from None
        if not items:
            raise ScalesieveError(f"{where}: 'levels' is empty", source)
        for v in items:
            if isinstance(v, str) and v == "a":
                continue
            if isinstance(v, bool) or not isinstance(v, int) or not 1 <= v <= MAX_LEVEL:
                raise ScalesieveError(f"{where}: level {_short(repr(v), 40)} is not a level "
                                      f"(1 to {MAX_LEVEL}, or 'a')", source)
    if e.channels is not None:
        if not e.channels:
            raise ScalesieveError(f"{where}: 'channels' is empty", source)
        for k in e.channels:
            if isinstance(k, bool) or not isinstance(k, int) or not 0 <= k <= MAX_CHANNEL:
                raise ScalesieveError(f"{where}: channel {_short(repr(k), 40)} is not a "
                                      "channel number (0-based)", source)
    if not isinstance(e.enabled, bool):
        raise ScalesieveError(f"{where}: 'enabled' must be true or false", source)
    check_cross_fields(e, index, source)


def check_cross_fields(e: Edit, index: int = 1, source: str | None = None) -> None:
    """What the schema cannot say: checks that relate two keys of one edit."""
    where = f"edit {index} ({e.op})"
    if e.op == "region" and not e.start_s < e.stop_s:
        raise ScalesieveError(f"{where}: start_s {_num(e.start_s)} must be before stop_s "
                              f"{_num(e.stop_s)}", source)


def _whole_level_numbers(e: Edit) -> bool:
    """True where an edit names levels only by whole numbers from 1 (and 'a')."""
    if e.bands is not None or isinstance(e.levels, str):
        return False
    try:
        items = list(e.levels)
    except TypeError:
        return False
    return bool(items) and all(
        v == "a" if isinstance(v, str)
        else isinstance(v, int) and not isinstance(v, bool) and v >= 1 for v in items)


def check_against(recipe_edits: Iterable[Edit], level, duration_s: float | None = None,
                  channels: int | None = None, source: str | None = None) -> None:
    """Check edits against a resolved transform and recording; raise naming the edit.

    ``level`` is the transform's depth or the resolved TransformSpec itself
    (needed for band names and packet transforms).  Each edit's own values
    are checked first (:func:`check_edit`), then its
    levels against the transform's depth, its channels against the
    recording's, and a region's times against the recording's span: a region
    must start inside the recording and end by its end.
    """
    edits = tuple(recipe_edits)
    if len(edits) > MAX_EDITS:
        raise ScalesieveError(f"{len(edits)} edits are more than a recipe may hold "
                              f"({MAX_EDITS})", source)
    for i, e in enumerate(edits, 1):
        if _whole_level_numbers(e):
            # a level past the limit is also past this transform: name its own levels
            try:
                resolve_bands(e, level)
            except ValueError as exc:
                raise ScalesieveError(f"edit {i} ({e.op}): {exc}", source) from None
        check_edit(e, i, source)
        try:
            resolve_bands(e, level)
        except ValueError as exc:
            raise ScalesieveError(f"edit {i} ({e.op}): {exc}", source) from None
        if channels is not None and e.channels is not None:
            for k in e.channels:
                if k >= channels:
                    raise ScalesieveError(
                        f"edit {i} ({e.op}): channel {k} is not in the recording "
                        f"(channels 0-{channels - 1})", source)
        if e.op == "region" and duration_s is not None:
            # A part in a billion of slack: a region drawn to the very end survives rounding.
            if e.start_s >= duration_s or e.stop_s > duration_s * (1 + 1e-9):
                raise ScalesieveError(
                    f"edit {i} (region): {_num(e.start_s)}-{_num(e.stop_s)} s is not inside "
                    f"the recording (0-{_num(duration_s)} s)", source)


# --------------------------------------------------------------------------
# reading and validating



def _reject_constant(name: str):
    raise ValueError(f"{name} is not a number JSON allows")


def _finite_float(text: str) -> float:
    # json reads 1e400 as inf; a recipe must not smuggle an infinity in that way.
    v = float(text)
    if not math.isfinite(v):
        raise ValueError(f"number {_short(text, 40)} is too large")
    return v


def _no_duplicate_keys(pairs):
    out = {}
    for key, value in pairs:
        if key in out:
            raise ValueError(f"key {_short(repr(key), 60)} appears twice in one object")
        out[key] = value
    return out


def _too_deep(data: Any, limit: int = _MAX_DEPTH) -> bool:
    """True when containers nest deeper than ``limit`` (checked without recursion)."""
    stack = [(data, 1)]
    while stack:
        obj, depth = stack.pop()
        if depth > limit:
            return True
        items = obj.values() if isinstance(obj, dict) else obj
        stack.extend((v, depth + 1) for v in items if isinstance(v, (dict, list)))
    return False


def loads(text: str, source: str | None = None) -> Recipe:
    """Parse recipe JSON text; every problem is a ScalesieveError naming it."""
    try:
        data = json.loads(text, parse_constant=_reject_constant, parse_float=_finite_float,
                          object_pairs_hook=_no_duplicate_keys)
    except RecursionError:
        raise ScalesieveError("not a recipe: the JSON is nested far too deeply", source) from None
    except ValueError as exc:
        line = getattr(exc, "lineno", None)
        msg = exc.msg if hasattr(exc, "msg") else str(exc)
        raise ScalesieveError(f"not a recipe: invalid JSON ({_short(msg)})", source,
                              line) from None
    return from_json(data, source)


def load(path: str | os.PathLike) -> Recipe:
    """Read a version-1 recipe file (UTF-8 JSON, at most ``MAX_RECIPE_BYTES``).

    Raises
    ------
    ScalesieveError
        For a missing, unreadable, non-regular or oversized file, text that
        is not JSON, and everything :func:`from_json` refuses.
    """
    p = os.fspath(path)
    try:
        st = os.stat(p)
        if os.path.isdir(p):
            raise ScalesieveError("is a folder, not a recipe file", p)
        if not stat.S_ISREG(st.st_mode):
            # A pipe or a device could block forever or never end.
            raise ScalesieveError("is not a regular file; a recipe is a JSON file", p)
        if st.st_size > MAX_RECIPE_BYTES:
            raise ScalesieveError(f"recipe file is {st.st_size} bytes; a recipe is at most "
                                  f"{MAX_RECIPE_BYTES} bytes", p)
        with open(p, "rb") as fh:
            raw = fh.read(MAX_RECIPE_BYTES + 1)
    except FileNotFoundError:
        raise ScalesieveError("recipe file not found", p) from None
    except PermissionError:
        raise ScalesieveError("permission denied", p) from None
    except OSError as exc:
        raise ScalesieveError(f"cannot read recipe: {exc.strerror or exc}", p) from None
    if len(raw) > MAX_RECIPE_BYTES:
        raise ScalesieveError(f"recipe file is larger than {MAX_RECIPE_BYTES} bytes", p)
    try:
        # Some editors save UTF-16 with a byte-order mark; JSON allows it (RFC 8259 §8.1).
        utf16 = raw.startswith((b"\xff\xfe", b"\xfe\xff"))
        text = raw.decode("utf-16" if utf16 else "utf-8-sig")
    except UnicodeDecodeError:
        raise ScalesieveError("not a recipe: the file is not UTF-8 JSON text", p) from None
    return loads(text, p)




def from_json(data: Any, source: str | None = None) -> Recipe:
    """A :class:`Recipe` from parsed JSON, checked against the version-1 schema.

    The version first (a plain message for files of another kind or
    version), then the schema, once: keys by op, required keys, types,
    words and ranges; then only what relates two keys
    (:func:`check_cross_fields`).  Levels, channels and times are checked
    against a recording later, by :func:`check_against`.
    """
    if not isinstance(data, dict) or "scalesieve_recipe" not in data:
        raise ScalesieveError("not a Scalesieve recipe (no \"scalesieve_recipe\": 1 key)", source)
    version = data.get("scalesieve_recipe")
    if type(version) is not int or version != RECIPE_VERSION:
        raise ScalesieveError(
            f"recipe version {_short(repr(version), 40)} is not supported "
            f"(this program reads version {RECIPE_VERSION})", source)
    if _too_deep(data):
        raise ScalesieveError("not a recipe: its JSON nests deeper than a recipe does", source)
    # Keys, ops, types and ranges: the schema, once (by hand where that is sure).
    if not recipe_schema.quick_valid(data):
        problem = recipe_schema.first_error(data)
        if problem is not None:
            raise ScalesieveError(problem, source)
    transform = data.get("transform")
    edits_raw = data["edits"]
    spec = None
    if transform is not None:
        t = transform
        basis = t.get("basis", "full")
        spec = TransformSpec(kind=t.get("kind", "dwt"), wavelet=t.get("wavelet", "db4"),
                             level=t.get("level"), mode=t.get("mode", "symmetric"),
                             basis=basis if isinstance(basis, str) else tuple(basis),
                             cost=t.get("cost", "shannon"))
        if spec.kind == "packet":
            try:
                spec.validate()
            except ValueError as exc:
                raise ScalesieveError(f"key 'transform': {exc}", source) from None
        if spec.wavelet not in discrete_wavelets():
            raise ScalesieveError(
                f"key 'transform.wavelet': {_short(repr(spec.wavelet), 40)} is not a discrete "
                "PyWavelets wavelet", source)
    edits = []
    for i, e in enumerate(edits_raw, 1):
        kw = dict(e)
        if e["op"] == "region":
            kw.setdefault("gain", 0.0)
        for fkey in ("gain", "value", "scale", "start_s", "stop_s"):
            if fkey in kw and kw[fkey] is not None:
                kw[fkey] = float(kw[fkey])
        edit = Edit(**kw)
        check_cross_fields(edit, i, source)
        edits.append(edit)
    return Recipe(spec, tuple(edits))


def save(recipe: Recipe, path: str | os.PathLike, force: bool = False, protect=()) -> None:
    from scalesieve.io.writers import write_json

    write_json(path, recipe.to_json(), force=force, protect=protect)


def with_edits(recipe: Recipe, edits: Iterable[Edit]) -> Recipe:
    return replace(recipe, edits=tuple(edits))
