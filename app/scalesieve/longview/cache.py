"""A long recording's summary kept in the user cache folder, so it is built once.

The folder is ``platformdirs.user_cache_dir("scalesieve")`` (or
``$XDG_CACHE_HOME/scalesieve``, ``~/.cache/scalesieve`` without platformdirs;
``$SCALESIEVE_CACHE_DIR`` wins), file ``summaries/<key>.npz``, ``<key>`` from
the recording's real path, the channel and the transform.  Inside, beside the
arrays, the file's size, modification time and the SHA-256 of its first MiB:
a summary whose file has changed since (stale), or that does not read back
whole and consistent (damaged), is built again, never trusted.  Writes are
atomic (``io.atomic``), so a killed write leaves no half file under the name.

The folder is pruned (``prune``) each time a summary is kept: summaries
unused for ``KEEP_DAYS`` days go, then the least recently used ones until
the rest fit in ``MAX_GIB`` GiB (``$SCALESIEVE_CACHE_MAX_GIB`` and
``$SCALESIEVE_CACHE_DAYS`` change them).  Reading a summary back marks it
used (its modification time).  A summary this process has open is never
removed, nor one used in the last ``BUSY_S`` seconds (another window may
hold it); each removal is one ``unlink``, so a summary is either whole or
gone.
"""

from __future__ import annotations

import hashlib
import json
import os

import numpy as np

from scalesieve.core import transforms as tf
from scalesieve.longview import summary as sm

#: bumped when what a summary holds changes: older files are then rebuilt
FORMAT = 2
#: bytes of the file's head hashed into the key
HEAD_BYTES = 1 << 20
#: summaries kept at most, in GiB (``$SCALESIEVE_CACHE_MAX_GIB``)
MAX_GIB = 4.0
#: a summary unused this many days is removed (``$SCALESIEVE_CACHE_DAYS``)
KEEP_DAYS = 60.0
#: a summary used this recently may be open in another window: kept
BUSY_S = 3600.0
#: the summaries this process has open (cache files), never pruned
IN_USE: set = set()


def cache_folder() -> str:
    """Where summaries are kept."""
    given = os.environ.get("SCALESIEVE_CACHE_DIR")
    if given:
        return given
    try:
        import platformdirs
    except ImportError:
        base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"),
                                                                 ".cache")
        return os.path.join(base, "scalesieve")
    return platformdirs.user_cache_dir("scalesieve", appauthor=False)


def file_facts(path: str) -> dict:
    """Size, modification time (ns) and the SHA-256 of the first MiB of ``path``."""
    st = os.stat(path)
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        h.update(fh.read(HEAD_BYTES))
    return {"size": int(st.st_size), "mtime_ns": int(st.st_mtime_ns), "head": h.hexdigest()}


def _spec_words(spec: tf.TransformSpec) -> dict:
    return {"kind": spec.kind, "wavelet": spec.wavelet, "level": int(spec.level),
            "mode": spec.mode}


def cache_path(path: str, spec: tf.TransformSpec, channel) -> str:
    """The file the summary of ``path`` under ``spec`` (and ``channel``) is kept in."""
    words = json.dumps({"path": os.path.realpath(path), "channel": channel,
                        "spec": _spec_words(spec), "format": FORMAT}, sort_keys=True)
    key = hashlib.sha256(words.encode()).hexdigest()[:32]
    return os.path.join(cache_folder(), "summaries", f"{key}.npz")


def save(summary: sm.Summary, path: str, channel, facts: dict) -> str:
    """Write ``summary`` for recording ``path`` atomically; returns the cache file."""
    from scalesieve.io.atomic import atomic_write

    target = cache_path(path, summary.spec, channel)
    os.makedirs(os.path.dirname(target), exist_ok=True)
    arrays, series = {}, []
    for k in range(summary.channels):
        for name, s in [("signal", summary.signal[k])] + \
                [(tf.band_name(key, summary.spec.level), s)
                 for key, s in summary.bands[k].items()]:
            i = len(series)
            series.append({"channel": k, "name": name, "block": s.block, "count": s.count,
                           "step": s.step, "shift": s.shift})
            for j, what in enumerate(("lo", "hi", "energy")):
                arrays[f"s{i}_{what}"] = s.tables[0][j]
    for k in range(summary.channels):
        for key, (bins, cnt) in summary.counts[k].items():
            name = tf.band_name(key, summary.spec.level)
            arrays[f"c{k}_{name}_bins"], arrays[f"c{k}_{name}_counts"] = bins, cnt
    manifest = {"format": FORMAT, "file": facts, "channel": channel, "n": summary.n,
                "rate": summary.rate, "channels": summary.channels,
                "spec": _spec_words(summary.spec), "series": series,
                "medians": [{tf.band_name(key, summary.spec.level): v for key, v in m.items()}
                            for m in summary.medians]}
    arrays["manifest"] = np.frombuffer(json.dumps(manifest).encode(), dtype=np.uint8)

    def write(tmp: str) -> None:
        with open(tmp, "wb") as fh:
            np.savez(fh, **arrays)
    atomic_write(target, write, force=True)
    return target


def load(path: str, spec: tf.TransformSpec, channel, facts: dict) -> sm.Summary | None:
    """The kept summary of ``path``, or ``None`` when there is none, it is stale or damaged."""
    target = cache_path(path, spec, channel)
    if not os.path.exists(target):
        return None
    try:
        with np.load(target, allow_pickle=False) as z:
            manifest = json.loads(bytes(z["manifest"]).decode())
            if manifest.get("format") != FORMAT or manifest.get("file") != facts \
                    or manifest.get("spec") != _spec_words(spec) \
                    or manifest.get("channel") != channel:
                return None
            got = _rebuild(manifest, z, spec)
    except Exception:  # noqa: BLE001 - any damage at all: build it again
        return None
    try:
        os.utime(target)                 # used now: the last to go when the folder is pruned
    except OSError:
        pass
    return got


def _rebuild(manifest: dict, z, spec: tf.TransformSpec) -> sm.Summary:
    n, chans, level = int(manifest["n"]), int(manifest["channels"]), spec.level
    keys = {tf.band_name(key, level): key for key in tf.band_keys(level)}
    signal: list = [None] * chans
    bands: list = [{} for _ in range(chans)]
    for i, d in enumerate(manifest["series"]):
        lo, hi, en = (np.asarray(z[f"s{i}_{w}"], dtype=np.float64)
                      for w in ("lo", "hi", "energy"))
        blocks = -(-int(d["count"]) // int(d["block"]))
        if not (lo.shape == hi.shape == en.shape == (blocks,)) or \
                not (np.isfinite(lo).all() and np.isfinite(hi).all() and np.isfinite(en).all()) \
                or np.any(lo > hi) or np.any(en < 0):
            raise ValueError(f"series {i} is inconsistent")
        s = sm.Series.from_blocks(int(d["block"]), int(d["count"]), float(d["step"]),
                                  float(d["shift"]), lo, hi, en)
        if d["name"] == "signal":
            signal[d["channel"]] = s
        else:
            bands[d["channel"]][keys[d["name"]]] = s
    medians = [{keys[name]: None if v is None else float(v) for name, v in m.items()}
               for m in manifest["medians"]]
    lengths = tf.band_lengths(n, spec)
    counts: list = []
    for k in range(chans):
        if signal[k] is None or signal[k].count != n or set(bands[k]) != set(keys.values()) \
                or set(medians[k]) != set(keys.values()):
            raise ValueError(f"channel {k} is incomplete")
        per = {}
        for key, s in bands[k].items():
            count = lengths[tf.band_index(key, level)]
            if s.count != count:
                raise ValueError(f"band {key} has the wrong length")
            name = tf.band_name(key, level)
            bins = np.asarray(z[f"c{k}_{name}_bins"])
            cnt = np.asarray(z[f"c{k}_{name}_counts"])
            if bins.shape != cnt.shape or np.any(cnt < 0) or int(cnt.sum()) > count or \
                    (bins.size and (bins.min() < 0 or bins.max() >= 1 << 20)):
                raise ValueError(f"band {key}'s noise counts are inconsistent")
            per[key] = (bins, cnt)
        counts.append(per)
    return sm.Summary(n, float(manifest["rate"]), chans, spec, signal, bands, counts, medians)


def summary_for(path: str, spec: tf.TransformSpec, channel=None, progress=None,
                cancelled=None) -> tuple[sm.Summary, str]:
    """The summary of ``path``: from the cache when it is there and sound, else built and kept.

    Returns ``(summary, how)``, ``how`` one of ``"kept"`` (read back) or
    ``"built"``.  A cache folder that cannot be written only costs the keeping.
    """
    from scalesieve.stream.pipeline import _Source

    facts = file_facts(path)
    IN_USE.add(cache_path(path, spec, channel))
    got = load(path, spec, channel, facts)
    if got is not None:
        got.kept_as = (path, channel, facts)
        return got, "kept"
    src = _Source(path, channel)
    summary = sm.build(src, spec, progress, cancelled)
    summary.kept_as = (path, channel, facts)
    keep(summary)
    return summary, "built"


def let_go(summary: sm.Summary) -> None:
    """The window is done with ``summary``: its cache file may be pruned from now on."""
    if summary.kept_as is not None:
        path, channel, _ = summary.kept_as
        IN_USE.discard(cache_path(path, summary.spec, channel))


def _setting(name: str, default: float) -> float:
    try:
        v = float(os.environ.get(name, ""))
    except ValueError:
        return default
    return v if v >= 0 else default


def prune(max_bytes: int | None = None, max_age_days: float | None = None,
          now: float | None = None, keep: tuple = ()) -> list[str]:
    """Remove summaries unused for ``max_age_days``, then the least recently used ones until
    the rest hold at most ``max_bytes``; returns the files removed.

    Never a summary in ``IN_USE`` or ``keep``, nor one used (or written) in the
    last ``BUSY_S`` seconds; a file that cannot be removed is left.
    """
    import time

    if max_bytes is None:
        max_bytes = int(_setting("SCALESIEVE_CACHE_MAX_GIB", MAX_GIB) * (1 << 30))
    if max_age_days is None:
        max_age_days = _setting("SCALESIEVE_CACHE_DAYS", KEEP_DAYS)
    now = time.time() if now is None else now
    folder = os.path.join(cache_folder(), "summaries")
    try:
        names = os.listdir(folder)
    except OSError:
        return []
    held = {os.path.realpath(p) for p in IN_USE | set(keep)}
    files = []
    for name in names:
        if not name.endswith(".npz") or name.startswith("."):
            continue                    # a write in progress has a hidden temporary name
        full = os.path.join(folder, name)
        try:
            st = os.stat(full)
        except OSError:
            continue
        files.append((st.st_mtime, st.st_size, full))
    files.sort()                                         # least recently used first
    total = sum(size for _, size, _ in files)
    gone = []
    for used, size, full in files:
        old = now - used > max_age_days * 86400.0
        if not old and total <= max_bytes:
            break
        if os.path.realpath(full) in held or now - used < BUSY_S:
            continue
        try:
            os.unlink(full)
        except OSError:
            continue
        total -= size
        gone.append(full)
    return gone


def keep(summary: sm.Summary) -> None:
    """Write ``summary`` back where it came from (with the file's facts as they were when it
    was made, so a file changed since is still caught); a cache folder that cannot be
    written only costs the keeping."""
    from scalesieve.errors import ScalesieveError

    path, channel, facts = summary.kept_as
    try:
        target = save(summary, path, channel, facts)
    except (OSError, ScalesieveError):
        return                         # a read-only cache: the summary still serves this time
    prune(keep=(target,))
