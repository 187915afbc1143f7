"""Replace a file atomically: write beside it, fsync, then rename into place.

Nothing the user had is lost: an existing target is replaced only with
``force``, an input file (``protect``) never, and a failed write leaves the old
target untouched and no temporary file behind.  A writer killed outright
leaves its temporary file, named so that it is clearly ours; the next write of
the same target removes it.
"""

from __future__ import annotations

import contextlib
import errno
import hashlib
import os
import socket
import tempfile
from collections.abc import Callable, Iterable, Iterator
from typing import Any, TypeVar

from scalesieve.errors import ScalesieveError

T = TypeVar("T")


def _same_file(a: str, b: str) -> bool:
    """True when ``a`` and ``b`` name the same file (hard links and symlinks too)."""
    try:
        if os.path.samefile(a, b):
            return True
    except OSError:
        pass
    return os.path.normcase(os.path.realpath(a)) == os.path.normcase(os.path.realpath(b))


def check_target(path: str | os.PathLike[str], *, force: bool = False,
                 protect: Iterable[str | os.PathLike[str]] = ()) -> str:
    """Check that ``path`` may be written; return it as ``str``.

    Raises
    ------
    ScalesieveError
        When ``path`` is one of ``protect`` (even with ``force``), is a folder,
        lies in a folder that does not exist, or exists and ``force`` is false.
    """
    target = os.fspath(path)
    if isinstance(target, bytes):  # pragma: no cover - bytes paths are not used
        target = os.fsdecode(target)
    if not target:
        raise ScalesieveError("no output file name given")
    if isinstance(protect, (str, bytes, os.PathLike)):
        protect = [protect]  # one path given on its own, not a list of them
    for p in protect or ():
        if p is None or p == "":
            continue
        if _same_file(target, os.fspath(p)):
            raise ScalesieveError(
                "is an input file; it is never overwritten (choose another output name)",
                source=target)
    if os.path.isdir(target):
        raise ScalesieveError("is a folder; give an output file name", source=target)
    folder = os.path.dirname(os.path.abspath(target))
    if not os.path.isdir(folder):
        raise ScalesieveError(f"folder {folder} does not exist", source=target)
    if os.path.lexists(target) and not force:
        raise ScalesieveError("exists; use --force to replace it", source=target)
    return target


#: Marks a temporary file as ours: ``.<stem>.tmp-scalesieve-<pid>.<host>-<random><suffix>``.
TEMP_MARK = ".tmp-scalesieve-"


def _host_tag() -> str:
    """Six hex digits naming this machine: a pid means nothing on another host."""
    return hashlib.sha256(socket.gethostname().encode("utf-8", "replace")).hexdigest()[:6]


def _temp_prefix(target: str) -> tuple[str, str, str]:
    """``(folder, prefix common to our temporary files for target, suffix)``."""
    folder = os.path.dirname(os.path.abspath(target))
    stem, suffix = os.path.splitext(os.path.basename(target))
    return folder, f".{stem}{TEMP_MARK}", suffix


def _temp_name(target: str) -> str:
    """Create an empty temporary file beside ``target`` with the same suffix."""
    folder, prefix, suffix = _temp_prefix(target)
    # Keep the suffix so that soundfile and numpy infer the format from the name;
    # the pid and host let a later write tell a dead writer's leftover from a live one.
    fd, tmp = tempfile.mkstemp(prefix=f"{prefix}{os.getpid()}.{_host_tag()}-", suffix=suffix,
                               dir=folder)
    os.close(fd)
    return tmp


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:
        return True  # exists, but belongs to someone else
    return not _zombie(pid)


def _zombie(pid: int) -> bool:
    """A killed process its parent has not reaped yet: it writes nothing any more."""
    try:
        with open(f"/proc/{pid}/stat", "rb") as fh:
            stat = fh.read()
    except OSError:
        return False     # no /proc (not Linux): take it as alive
    # "pid (name) S ...": the state follows the last ')' (a name may hold one)
    return stat[stat.rfind(b")") + 2:][:1] in (b"Z", b"X")


def remove_stale_temporaries(path: str | os.PathLike[str]) -> list[str]:
    """Delete temporary files that killed writers of ``path`` left beside it.

    A writer killed mid-write (power cut, SIGKILL, a crash) cannot remove its
    temporary file; the next write of the same target does.  Only files named
    as :func:`_temp_name` names them, made on this machine by a process that
    no longer runs, are removed; a live writer's file is left alone.

    Returns
    -------
    list of str
        The paths removed.
    """
    target = os.fspath(path)
    folder, prefix, suffix = _temp_prefix(target)
    host = _host_tag()
    removed = []
    try:
        names = os.listdir(folder)
    except OSError:
        return removed
    for name in names:
        # "." + prefix: the temporary of a temporary (files published together)
        lead = prefix if name.startswith(prefix) else "." + prefix
        if not (name.startswith(lead) and name.endswith(suffix)):
            continue
        owner = name[len(lead):].split("-", 1)[0]
        pid_text, _, tag = owner.partition(".")
        if not pid_text.isdigit() or tag != host:
            continue
        pid = int(pid_text)
        if pid == os.getpid() or _alive(pid):
            continue
        leftover = os.path.join(folder, name)
        with contextlib.suppress(OSError):
            os.unlink(leftover)
            removed.append(leftover)
    return removed


def _final_mode(target: str) -> int:
    """Mode for the new file: the old target's, else what the umask allows."""
    try:
        return os.stat(target).st_mode & 0o7777
    except OSError:
        umask = os.umask(0)
        os.umask(umask)
        return 0o666 & ~umask


def _fsync_file(path: str) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _fsync_folder(folder: str) -> None:
    # Makes the rename itself durable; not every platform can open a folder.
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def _os_message(exc: OSError) -> str:
    if exc.errno == errno.ENOSPC:
        return "not enough disk space to write it"
    if exc.errno in (errno.EACCES, errno.EPERM):
        return "cannot write here (permission denied)"
    if exc.errno == errno.EROFS:
        return "cannot write here (read-only file system)"
    return f"cannot write: {exc.strerror or exc}"


def _publish(tmp: str, target: str, force: bool) -> None:
    """Move the finished temporary file onto ``target``."""
    if not force:
        # A hard link fails if the target appeared meanwhile, so a file created
        # by someone else between the check and now is not clobbered.
        try:
            os.link(tmp, target)
        except FileExistsError:
            raise ScalesieveError("exists; use --force to replace it", source=target) from None
        except OSError:
            pass  # file system without hard links: fall back to rename
        else:
            os.unlink(tmp)
            return
        if os.path.lexists(target):
            raise ScalesieveError("exists; use --force to replace it", source=target)
    os.replace(tmp, target)


@contextlib.contextmanager
def atomic_target(path: str | os.PathLike[str], *, force: bool = False,
                  protect: Iterable[str | os.PathLike[str]] = ()) -> Iterator[str]:
    """Context manager yielding a temporary path to write; published on success.

    Examples
    --------
    >>> with atomic_target("out.json", force=True) as tmp:  # doctest: +SKIP
    ...     open(tmp, "w").write("{}")
    """
    target = check_target(path, force=force, protect=protect)
    folder = os.path.dirname(os.path.abspath(target))
    remove_stale_temporaries(target)
    try:
        tmp = _temp_name(target)
    except OSError as exc:
        raise ScalesieveError(_os_message(exc), source=target) from None
    try:
        yield tmp
        os.chmod(tmp, _final_mode(target))
        _fsync_file(tmp)
        _publish(tmp, target, force)
        _fsync_folder(folder)
    except OSError as exc:
        raise ScalesieveError(_os_message(exc), source=target) from None
    finally:
        # After a successful publish the name is gone; after a failure it is removed.
        with contextlib.suppress(OSError):
            os.unlink(tmp)


@contextlib.contextmanager
def atomic_targets(paths: Iterable[str | os.PathLike[str]], *, force: bool = False,
                   protect: Iterable[str | os.PathLike[str]] = ()) -> Iterator[list[str]]:
    """Like :func:`atomic_target` for several files that appear together or not at all.

    Yields one temporary path per target.  Only when every one was written
    are they published; if publishing one fails, those published before it are
    taken back (a file that was not there is removed, a file replaced with
    ``force`` gets its old contents back), so a failure leaves every target as
    it was.
    """
    targets = [check_target(p, force=force, protect=protect) for p in paths]
    temps: list[str] = []
    try:
        for target in targets:
            remove_stale_temporaries(target)
            try:
                temps.append(_temp_name(target))
            except OSError as exc:
                raise ScalesieveError(_os_message(exc), source=target) from None
        yield list(temps)
        published: list[tuple[str, str | None]] = []   # (target, backup of its old file)
        current = targets[0] if targets else None
        backup = None
        try:
            for tmp, target in zip(temps, targets):
                current = target
                os.chmod(tmp, _final_mode(target))
                _fsync_file(tmp)
                backup = None
                if os.path.lexists(target):
                    backup = _temp_name(target)
                    os.unlink(backup)
                    try:
                        os.link(target, backup)   # the old file stays reachable until the end
                    except OSError:
                        os.replace(target, backup)    # no hard links here: move it aside
                _publish(tmp, target, force)
                published.append((target, backup))
            for target in targets:
                _fsync_folder(os.path.dirname(os.path.abspath(target)))
        except BaseException as failure:
            if backup is not None and (not published or published[-1][0] != current):
                # the backup of a target whose publish failed: put back or drop
                with contextlib.suppress(OSError):
                    if os.path.lexists(current):
                        os.unlink(backup)
                    else:
                        os.replace(backup, current)
            for target, backup in reversed(published):
                with contextlib.suppress(OSError):
                    if backup is None:
                        os.unlink(target)
                    else:
                        os.replace(backup, target)
            published = []
            if isinstance(failure, OSError):
                raise ScalesieveError(_os_message(failure), source=current) from None
            raise
        finally:
            for _, backup in published:
                if backup is not None:
                    with contextlib.suppress(OSError):
                        os.unlink(backup)
    finally:
        for tmp in temps:
            with contextlib.suppress(OSError):
                os.unlink(tmp)


def atomic_write(path: str | os.PathLike[str], write_fn: Callable[[str], T] | None = None,
                 *, force: bool = False,
                 protect: Iterable[str | os.PathLike[str]] = ()) -> Any:
    """Write ``path`` atomically by calling ``write_fn(temporary_path)``.

    The temporary file sits in the target's folder, is named
    ``.<stem>.tmp-scalesieve-<pid>.<host>-XXXX<suffix>`` (same suffix, so
    libraries that infer the format from the name still do), is fsynced, then
    renamed onto ``path``.  A writer killed at any moment leaves the old file
    or the complete new one under ``path``, never a torn one; its temporary
    file is removed by the next write of ``path``
    (:func:`remove_stale_temporaries`).

    Parameters
    ----------
    path : str or os.PathLike
        The file to create or replace. Its folder must exist.
    write_fn : callable, optional
        Called with the temporary path (``str``); must write the whole file
        there. Its return value is returned. Without ``write_fn`` a context
        manager yielding the temporary path is returned instead (see
        :func:`atomic_target`).
    force : bool
        Replace an existing ``path``. Without it an existing file is an error.
    protect : iterable of paths
        Files never to overwrite, even with ``force`` (the inputs). Compared
        with ``os.path.samefile`` and ``realpath``, so links are caught.

    Raises
    ------
    ScalesieveError
        For a refused target or an operating-system error while writing. On
        any failure the old target is left as it was and the temporary file is
        removed; exceptions other than ``OSError`` propagate unchanged.
    """
    if write_fn is None:
        return atomic_target(path, force=force, protect=protect)
    with atomic_target(path, force=force, protect=protect) as tmp:
        result = write_fn(tmp)
    return result
