"""The ``scalesieve batch`` command line the window shows for a saved recipe.

Text only: no process pools, no Dask, no Qt.
"""

from __future__ import annotations

import os
import re
import shlex

#: characters that make an input a pattern
GLOB_CHARS = set("*?[")
_GLOB_CHARS = GLOB_CHARS


def inputs_hint_for(recording_path: str) -> str:
    """A pattern for "every recording like this one": its folder and suffix."""
    folder = os.path.dirname(os.path.abspath(recording_path))
    suffix = os.path.splitext(recording_path)[1]
    return os.path.join(folder, "*" + suffix)


def outdir_for(recording_path: str) -> str:
    """Where a batch of recordings like this one may go: ``cleaned`` in their folder."""
    return os.path.join(os.path.dirname(os.path.abspath(recording_path)), "cleaned")


def _quote_windows(arg: str) -> str:
    if arg and not any(c in arg for c in ' \t"&|<>^%'):
        return arg
    # Microsoft C runtime rules: backslashes are literal except before a quote.
    body = re.sub(r'(\\*)"', r'\1\1\\"', arg)
    body = re.sub(r'(\\+)$', r'\1\1', body)
    return f'"{body}"'


def batch_command_line(recipe_path: str, inputs_hint: str, outdir: str,
                       workers: int | None = None, *, scheduler: str | None = None,
                       force: bool = False, program: str = "scalesieve",
                       shell: str | None = None) -> str:
    """The ``scalesieve batch`` command that replays a saved recipe, ready to copy.

    Parameters
    ----------
    recipe_path : str
        The exported recipe file.
    inputs_hint : str
        A file, a folder, or a pattern such as ``/data/pump/*.wav``
        (:func:`inputs_hint_for` makes one from the open recording).  On a
        POSIX shell the pattern part stays unquoted so the shell expands it;
        on Windows the whole hint is quoted and ``batch`` expands it itself.
    outdir : str
        The output folder.
    workers : int, optional
        ``--workers N``; left out when ``None`` (all CPUs) or when
        ``scheduler`` is given.
    scheduler : str, optional
        ``--scheduler ADDRESS`` instead of local processes.
    shell : {'posix', 'windows'}, optional
        Quoting rules; default from the platform.

    Examples
    --------
    >>> batch_command_line("/data/r.json", "/data/pump runs/*.wav", "/data/clean", 2,
    ...                    shell="posix")
    "scalesieve batch --recipe /data/r.json -o /data/clean --workers 2 '/data/pump runs'/*.wav"
    """
    shell = shell or ("windows" if os.name == "nt" else "posix")
    quote = shlex.quote if shell == "posix" else _quote_windows
    words = [program, "batch", "--recipe", quote(recipe_path), "-o", quote(outdir)]
    if scheduler:
        words += ["--scheduler", quote(scheduler)]
    elif workers is not None:
        words += ["--workers", str(int(workers))]
    if force:
        words.append("--force")
    folder, base = os.path.split(inputs_hint)
    if shell == "posix" and _GLOB_CHARS & set(base) and not _GLOB_CHARS & set(folder) \
            and all(c.isalnum() or c in "*?[]._-" for c in base):
        words.append((quote(folder.rstrip("/")) + "/" if folder.rstrip("/") else folder) + base)
    else:
        words.append(quote(inputs_hint))
    return " ".join(words)
