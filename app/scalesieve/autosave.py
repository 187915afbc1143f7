"""Keep the window's unsaved work on disk, so a crash loses nothing.

After every edit the window saves the recording's recipe and its view state
(:func:`save_session`); one small JSON file per recording, in the user data
folder (``platformdirs.user_data_dir("scalesieve")/sessions``, or
``$SCALESIEVE_DATA_DIR/sessions``), written atomically.  When the same
recording is opened again, :func:`pending_restore` says whether saved edits
wait there and whether the recording changed on disk since they were made;
:func:`clear_session` forgets them once the user has saved or discarded
them, or closed the recording normally; :func:`keep_aside` puts them out of
the way, kept, when the user opens the recording without them.

Whether the recording changed is decided by its SHA-256, taken when the
session began (the first save, or given by the caller from when the file was
opened), and taken again every time a restore is offered, whatever the size
and modification time say (``cp -p`` keeps both while changing the bytes).
Files up to :data:`FULL_HASH_BYTES` (256 MiB) are hashed whole, streamed in
1 MiB chunks (hashlib releases the GIL on each chunk, so a worker thread can
do it while the window stays responsive).  Larger files get a *sampled*
SHA-256 of their size, first and last MiB and 32 evenly spaced 64 KiB blocks;
it catches any change of size and nearly every rewrite, but not an edit
confined to unsampled bytes, so for those files a changed modification time
also counts as a change.  The method is stored with the hash.

What is kept where, and for how long
------------------------------------
``sessions/<key>.json``: the edits of a recording open now, or of one whose
window did not close normally (offered back when it is opened again).  A
normal close, opening another recording, saving the recipe or exporting the
signal ends it: edits that were saved or exported are forgotten; edits that
were not go to ``sessions/<key>.kept-<time>.json``, a *kept session*, as do
those the user keeps for later and those a restore could not apply.  Kept
sessions are listed under File > Kept edits, can be opened as a recipe or
saved as a recipe file, and are removed by the user there or, untouched for
:data:`KEPT_DAYS` days, when the window starts (:func:`prune_kept`).
Unreadable session files are set aside as ``<key>.unreadable-<time>.json``
and never removed.

No Qt here: the window calls these functions; ``gui/restore_prompt.py`` asks
the user.
"""

from __future__ import annotations

import datetime
import hashlib
import json
import math
import os
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

from scalesieve.errors import ScalesieveError

SESSION_VERSION = 1
#: Environment variable naming the data folder (tests, portable installs).
DATA_DIR_ENV = "SCALESIEVE_DATA_DIR"
#: Files up to this size are hashed whole; larger ones by samples.
FULL_HASH_BYTES = 256 << 20
_CHUNK = 1 << 20
_SAMPLE_BLOCKS = 32
_SAMPLE_BLOCK = 64 << 10
#: A session file is a recipe and a few view settings; beyond this it is not one.
_MAX_SESSION_BYTES = 16 << 20
#: Kept sessions not saved for this many days are removed when the window starts.
KEPT_DAYS = 30


# ------------------------------------------------------------------ places

def data_dir() -> str:
    """The user data folder: ``$SCALESIEVE_DATA_DIR`` or platformdirs' ``user_data_dir``."""
    env = os.environ.get(DATA_DIR_ENV)
    if env:
        return env
    from platformdirs import user_data_dir

    return user_data_dir("scalesieve", appauthor=False)


def sessions_dir() -> str:
    return os.path.join(data_dir(), "sessions")


def _recording_path(path: str | os.PathLike[str]) -> str:
    """The recording's canonical absolute path: one session per file, however named."""
    return os.path.normcase(os.path.realpath(os.path.abspath(os.fspath(path))))


def session_key(path: str | os.PathLike[str]) -> str:
    """A file-name-safe key for a recording path (SHA-256 of its canonical path)."""
    return hashlib.sha256(_recording_path(path).encode("utf-8", "surrogatepass")).hexdigest()[:32]


def session_file(path: str | os.PathLike[str]) -> str:
    """Where the session of the recording at ``path`` is kept."""
    return os.path.join(sessions_dir(), session_key(path) + ".json")


# ------------------------------------------------------------- fingerprints

@dataclass(frozen=True)
class Fingerprint:
    """What a recording was: size, modification time and SHA-256 (whole or sampled)."""

    size: int
    mtime_ns: int
    sha256: str
    method: str  # "sha256" (whole file) or "sampled-sha256"

    def to_json(self) -> dict:
        return {"size": self.size, "mtime_ns": self.mtime_ns, "sha256": self.sha256,
                "method": self.method}

    @classmethod
    def from_json(cls, d: Mapping) -> "Fingerprint":
        return cls(int(d["size"]), int(d["mtime_ns"]), str(d["sha256"]), str(d["method"]))


class Cancelled(Exception):
    """Raised by :func:`fingerprint` when its ``cancel`` callable said stop."""


def fingerprint(path: str | os.PathLike[str], *, full_limit: int = FULL_HASH_BYTES,
                progress: Callable[[float], None] | None = None,
                cancel: Callable[[], bool] | None = None) -> Fingerprint:
    """Size, modification time and SHA-256 of a recording, read in 1 MiB chunks.

    Parameters
    ----------
    path : str or os.PathLike
    full_limit : int
        Files up to this many bytes are hashed whole; larger ones by samples
        (see the module docstring).
    progress : callable(fraction), optional
        Told how far the hashing has got (for a progress bar).
    cancel : callable() -> bool, optional
        Polled between chunks; when it returns true, :class:`Cancelled` is
        raised (the window closed the recording meanwhile).

    Raises
    ------
    ScalesieveError
        When the file cannot be read.
    """
    p = os.fspath(path)
    h = hashlib.sha256()
    try:
        st = os.stat(p)
        size = int(st.st_size)
        with open(p, "rb") as fh:
            if size <= full_limit:
                method = "sha256"
                done = 0
                while True:
                    if cancel is not None and cancel():
                        raise Cancelled()
                    chunk = fh.read(_CHUNK)
                    if not chunk:
                        break
                    h.update(chunk)
                    done += len(chunk)
                    if progress is not None and size:
                        progress(min(1.0, done / size))
            else:
                method = "sampled-sha256"
                h.update(size.to_bytes(8, "little"))
                offsets = [0, max(0, size - _CHUNK)]
                span = max(0, size - _SAMPLE_BLOCK)
                offsets += [span * (k + 1) // (_SAMPLE_BLOCKS + 1)
                            for k in range(_SAMPLE_BLOCKS)]
                for i, at in enumerate(offsets):
                    if cancel is not None and cancel():
                        raise Cancelled()
                    fh.seek(at)
                    h.update(fh.read(_CHUNK if i < 2 else _SAMPLE_BLOCK))
                    if progress is not None:
                        progress((i + 1) / len(offsets))
    except OSError as exc:
        raise ScalesieveError(f"cannot read the recording to fingerprint it "
                              f"({exc.strerror or exc})", source=p) from None
    return Fingerprint(size, int(st.st_mtime_ns), h.hexdigest(), method)


def _compare(recorded: Fingerprint, path: str) -> tuple[bool, str | None, Fingerprint | None]:
    """``(changed, reason, current fingerprint or None)`` of the recording at ``path``."""
    try:
        st = os.stat(path)
    except OSError:
        return True, "the recording is no longer there", None
    if st.st_size != recorded.size:
        return True, (f"its size changed from {recorded.size} to {st.st_size} bytes"), None
    # Hashed again even with the same size and time stamp: a copy made with
    # ``cp -p`` (or a clock set back) keeps both while the contents differ.
    current = fingerprint(path, full_limit=FULL_HASH_BYTES if recorded.method == "sha256"
                          else -1)
    if current.sha256 != recorded.sha256:
        return True, "its contents differ (SHA-256)", current
    if recorded.method != "sha256" and st.st_mtime_ns != recorded.mtime_ns:
        return True, ("it was modified since (same size and sampled content; too large "
                      "to compare whole)"), current
    return False, None, current  # the same bytes (or, sampled, the same samples and time)


# ------------------------------------------------------------- plain JSON

def _plain(obj: Any, where: str = "view state") -> Any:
    """A JSON-ready copy; NaN and infinities (a view's empty range) become None."""
    if obj is None or isinstance(obj, (bool, str)):
        return obj
    if isinstance(obj, int):
        return int(obj)
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, Mapping):
        return {str(k): _plain(v, where) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_plain(v, where) for v in obj]
    # numpy scalars and arrays, without importing numpy here
    if hasattr(obj, "tolist"):
        return _plain(obj.tolist(), where)
    if isinstance(obj, os.PathLike):
        return os.fspath(obj)
    raise ScalesieveError(f"the {where} holds a {type(obj).__name__}, which cannot be saved")


def _recipe_dict(recipe_json) -> dict:
    if hasattr(recipe_json, "to_json") and callable(recipe_json.to_json):
        return _plain(recipe_json.to_json(), "recipe")
    if isinstance(recipe_json, (str, bytes)):
        try:
            data = json.loads(recipe_json)
        except ValueError as exc:
            raise ScalesieveError(f"the recipe to save is not JSON ({exc})") from None
        if not isinstance(data, dict):
            raise ScalesieveError("the recipe to save is not a JSON object")
        return data
    if isinstance(recipe_json, Mapping):
        return _plain(recipe_json, "recipe")
    raise ScalesieveError(f"cannot save a recipe given as {type(recipe_json).__name__}")


def _now() -> str:
    return datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds")


def _read_session(file: str) -> dict | None:
    """The session stored in ``file``; ``None`` when there is none or it is unreadable."""
    try:
        if os.path.getsize(file) > _MAX_SESSION_BYTES:
            return None
        with open(file, encoding="utf-8") as fh:
            data = json.load(fh)
    except (OSError, ValueError, RecursionError):
        return None
    if not isinstance(data, dict) or data.get("scalesieve_session") != SESSION_VERSION:
        return None
    return data


def _set_aside(file: str) -> str | None:
    """Move an unreadable session out of the way (kept, never deleted)."""
    stamp = datetime.datetime.now().strftime("%Y%m%d-%H%M%S")
    aside = file[:-len(".json")] + f".unreadable-{stamp}.json"
    try:
        os.replace(file, aside)
    except OSError:
        return None
    return aside


# ------------------------------------------------------------------ saving

def save_session(path: str | os.PathLike[str], recipe_json, view_state: Mapping | None = None,
                 *, fingerprint: Fingerprint | None = None) -> str:
    """Save the recipe and view state of the recording at ``path``; return the session file.

    Cheap enough to call after every edit: it writes one small file and, past
    the first save, only stats the recording.

    Parameters
    ----------
    path : str or os.PathLike
        The recording (the key: one session per file).
    recipe_json : dict, str or Recipe
        The recipe as ``Recipe.to_json()`` gives it (or its text, or the
        Recipe itself).
    view_state : dict, optional
        Whatever the window needs to put its view back (zoom, selected band,
        channel...): plain JSON data; NaN and infinities become null.
    fingerprint : Fingerprint, optional
        The recording as it was when opened (see :func:`fingerprint`; a
        window can compute it in a worker thread).  Without it the session
        keeps the fingerprint it already has, or takes one now.  Pass a fresh
        one after restoring edits onto a recording that had changed.

    Raises
    ------
    ScalesieveError
        When the data cannot be saved (not plain data, disk full, no
        permission); the message says why.  Nothing already saved is lost.
    """
    from scalesieve.io.atomic import atomic_write

    source = os.fspath(path)
    recipe = _recipe_dict(recipe_json)
    view = _plain(dict(view_state or {}))
    file = session_file(source)
    old = _read_session(file) if os.path.exists(file) else None
    if old is not None and old.get("recording", {}).get("path") != _recording_path(source):
        old = None
    if fingerprint is not None:
        fp = fingerprint
    elif old is not None and isinstance(old.get("recording", {}).get("fingerprint"), dict):
        fp = Fingerprint.from_json(old["recording"]["fingerprint"])
    else:
        fp = _fingerprint(source)
    now = _now()
    session = {
        "scalesieve_session": SESSION_VERSION,
        "recording": {"path": _recording_path(source), "given_path": source,
                      "fingerprint": fp.to_json()},
        "recipe": recipe,
        "view": view,
        "edits": len(recipe.get("edits") or []) if isinstance(recipe.get("edits"), list) else 0,
        "created": (old or {}).get("created", now),
        "saved": now,
        "pid": os.getpid(),
    }
    text = json.dumps(session, indent=1, ensure_ascii=False, allow_nan=False) + "\n"
    try:
        os.makedirs(os.path.dirname(file), exist_ok=True)
    except OSError as exc:
        raise ScalesieveError(f"cannot create the session folder ({exc.strerror or exc})",
                              source=os.path.dirname(file)) from None

    def write(tmp: str) -> None:
        with open(tmp, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(text)

    atomic_write(file, write, force=True)
    return file


def _fingerprint(source: str) -> Fingerprint:
    return fingerprint(source)


# --------------------------------------------------------------- restoring

@dataclass(frozen=True)
class RestoreInfo:
    """Saved edits waiting for a recording, and whether it changed since."""

    path: str                    # the recording, as given
    session_file: str
    recipe_json: dict            # as saved
    recipe: Any                  # a scalesieve.recipe.Recipe, or None when it no longer reads
    problem: str | None          # why ``recipe`` is None
    view_state: dict
    edit_count: int
    created: str                 # ISO-8601, UTC: when the session began
    saved: str                   # when it was last saved
    changed: bool                # the recording changed on disk since the session began
    change_reason: str | None
    recorded: Fingerprint        # the recording when the session began
    current: Fingerprint | None  # now (None when not needed or not readable)

    def summary(self) -> str:
        """One line for a prompt or a log."""
        n = self.edit_count
        text = f"{n} edit{'s' if n != 1 else ''} saved {self.saved}"
        if self.changed:
            text += f"; the recording changed on disk since ({self.change_reason})"
        if self.problem:
            text += f"; {self.problem}"
        return text


def pending_restore(path: str | os.PathLike[str]) -> RestoreInfo | None:
    """Saved edits for the recording at ``path``, or ``None`` when there are none.

    Call it when a recording is opened, before the first edit.  A session
    without edits (only a view) is not offered.  An unreadable session file
    is moved aside (``<key>.unreadable-<time>.json``, kept) and ``None``
    returned.

    Raises
    ------
    ScalesieveError
        Only when the recording itself cannot be read to compare it.
    """
    source = os.fspath(path)
    file = session_file(source)
    if not os.path.exists(file):
        return None
    data = _read_session(file)
    try:
        recording = data["recording"] if data else None
        recorded = Fingerprint.from_json(recording["fingerprint"]) if recording else None
        recipe_json = data["recipe"] if data else None
        if not isinstance(recipe_json, dict):
            raise TypeError
    except (KeyError, TypeError, ValueError):
        _set_aside(file)
        return None
    if recording.get("path") != _recording_path(source):
        return None
    edits = recipe_json.get("edits")
    count = len(edits) if isinstance(edits, list) else 0
    if count == 0:
        return None
    from scalesieve.recipe import from_json

    recipe, problem = None, None
    try:
        recipe = from_json(recipe_json, source=file)
    except ScalesieveError as err:
        problem = f"the saved recipe no longer reads: {err.message}"
    changed, reason, current = _compare(recorded, source)
    view = data.get("view") if isinstance(data.get("view"), dict) else {}
    return RestoreInfo(path=source, session_file=file, recipe_json=recipe_json, recipe=recipe,
                       problem=problem, view_state=view, edit_count=count,
                       created=str(data.get("created", "")), saved=str(data.get("saved", "")),
                       changed=changed, change_reason=reason, recorded=recorded,
                       current=current)


def clear_session(path: str | os.PathLike[str]) -> bool:
    """Forget the saved edits of the recording at ``path``; True when there were some."""
    try:
        os.unlink(session_file(path))
    except FileNotFoundError:
        return False
    except OSError as exc:
        raise ScalesieveError(f"cannot remove the saved session ({exc.strerror or exc})",
                              source=session_file(path)) from None
    return True


def keep_aside(path: str | os.PathLike[str]) -> str | None:
    """Move the saved edits of ``path`` out of the way, kept, so new edits do not overwrite them.

    For a user who opens the recording without restoring and without
    discarding ("keep them for later"): the next :func:`save_session` starts
    a new session, and the kept file (``<key>.kept-<time>.json``) stays in the
    sessions folder, listed by :func:`list_sessions`.  Returns its path, or
    ``None`` when there was nothing to keep.
    """
    file = session_file(path)
    if not os.path.exists(file):
        return None
    stamp = datetime.datetime.now().strftime("%Y%m%d-%H%M%S-%f")
    kept = file[:-len(".json")] + f".kept-{stamp}.json"
    k = 1
    while os.path.lexists(kept):            # never over an earlier kept session
        kept = file[:-len(".json")] + f".kept-{stamp}-{k}.json"
        k += 1
    try:
        os.replace(file, kept)
    except OSError as exc:
        raise ScalesieveError(f"cannot keep the saved session aside ({exc.strerror or exc})",
                              source=file) from None
    return kept


def list_sessions() -> list[dict]:
    """Every readable session, newest first: ``path``, ``edits``, ``saved``, ``file`` and
    ``kept`` (true for sessions put aside by :func:`keep_aside` or :func:`finish_session`)."""
    folder = sessions_dir()
    out = []
    try:
        names = sorted(os.listdir(folder))
    except OSError:
        return out
    for name in names:
        if not name.endswith(".json") or ".unreadable-" in name or name.startswith("."):
            continue
        data = _read_session(os.path.join(folder, name))
        if data is None:
            continue
        out.append({"path": data.get("recording", {}).get("given_path"),
                    "edits": data.get("edits", 0), "saved": data.get("saved", ""),
                    "file": os.path.join(folder, name), "kept": ".kept-" in name})
    return sorted(out, key=lambda d: d["saved"], reverse=True)


def finish_session(path: str | os.PathLike[str], captured: Mapping | None = None) -> str | None:
    """End the session of ``path`` normally (the window closed it); nothing unsaved is lost.

    Edits that are all in ``captured`` (the recipe as last saved or exported,
    ``Recipe.to_json()``), or no edits at all, are forgotten; other edits are
    kept aside (:func:`keep_aside`), listed as a kept session, and not offered
    as after a crash.  Returns the kept file, or ``None``.
    """
    file = session_file(path)
    data = _read_session(file) if os.path.exists(file) else None
    if data is None:
        return None
    recipe = data.get("recipe") if isinstance(data.get("recipe"), dict) else {}
    edits = recipe.get("edits") if isinstance(recipe.get("edits"), list) else []
    if not edits or (captured is not None and same_recipe(recipe, captured)):
        clear_session(path)
        return None
    return keep_aside(path)


def same_recipe(a: Mapping, b: Mapping) -> bool:
    return json.dumps(_plain(a), sort_keys=True) == json.dumps(_plain(b), sort_keys=True)


def _in_sessions(file: str) -> str:
    folder = os.path.realpath(sessions_dir())
    real = os.path.realpath(file)
    if os.path.dirname(real) != folder or not real.endswith(".json"):
        raise ScalesieveError("is not a session file of this user", source=file)
    return real


def read_kept(file: str):
    """The recipe of a session file: ``(Recipe, session data)``.

    Raises
    ------
    ScalesieveError
        When the file is gone, unreadable, or its recipe no longer reads.
    """
    from scalesieve.recipe import from_json

    real = _in_sessions(file)
    data = _read_session(real)
    if data is None or not isinstance(data.get("recipe"), dict):
        raise ScalesieveError("cannot read these kept edits", source=file)
    return from_json(data["recipe"], source=file), data


def delete_kept(file: str) -> None:
    """Remove one session file (the user chose to); only inside the sessions folder."""
    real = _in_sessions(file)
    try:
        os.unlink(real)
    except FileNotFoundError:
        return
    except OSError as exc:
        raise ScalesieveError(f"cannot remove these kept edits ({exc.strerror or exc})",
                              source=file) from None


def prune_kept(max_age_days: float = KEPT_DAYS, now: datetime.datetime | None = None
               ) -> list[str]:
    """Remove kept sessions last saved more than ``max_age_days`` ago; return them.

    Only kept sessions (``*.kept-*.json``): the session of a window that did
    not close normally waits to be offered, however old.
    """
    now = now or datetime.datetime.now(datetime.timezone.utc)
    limit = now - datetime.timedelta(days=max_age_days)
    gone = []
    for s in list_sessions():
        if not s["kept"]:
            continue
        try:
            saved = datetime.datetime.fromisoformat(s["saved"])
        except (TypeError, ValueError):
            continue
        if saved.tzinfo is None:
            saved = saved.replace(tzinfo=datetime.timezone.utc)
        if saved < limit:
            try:
                os.unlink(s["file"])
            except OSError:
                continue
            gone.append(s["file"])
    return gone
