"""Which files a batch cleans, where each output goes, and what is refused before any work."""

from __future__ import annotations

import glob
import os
import tempfile
from typing import Sequence

from scalesieve.batch_command import GLOB_CHARS as _GLOB_CHARS
from scalesieve.errors import ScalesieveError
from scalesieve.io.readers import RECORDING_EXTENSIONS

REPORT_NAME = "batch-report.json"
#: what a folder given as INPUT contributes (not recursive): every extension the readers
#: take, audio, text tables and measurement files alike (io/readers.py)
RECORDING_SUFFIXES = tuple(sorted(RECORDING_EXTENSIONS))


def expand_inputs(inputs: Sequence[str]) -> list[str]:
    """Inputs as given, with folders and unexpanded patterns opened up.

    A folder contributes its recordings (by suffix, not recursive, hidden
    files skipped); a name with ``*``, ``?`` or ``[`` that is not a file
    itself is expanded as a pattern (shells such as Windows cmd leave them).
    """
    out: list[str] = []
    for item in inputs:
        if os.path.isdir(item):
            names = sorted(n for n in os.listdir(item)
                           if not n.startswith(".") and n != REPORT_NAME
                           and os.path.splitext(n)[1].lower() in RECORDING_SUFFIXES
                           and os.path.isfile(os.path.join(item, n)))
            if not names:
                raise ScalesieveError("folder holds no recordings (audio files, text tables "
                                      "or measurement files such as .wav .flac .csv .tdms "
                                      ".edf .mat .h5 .mf4 .xlsx)", item)
            out.extend(os.path.join(item, n) for n in names)
        elif not os.path.lexists(item) and _GLOB_CHARS & set(item):
            found = sorted(glob.glob(item))
            if not found:
                raise ScalesieveError("no file matches this pattern", item)
            out.extend(found)
        else:
            out.append(item)
    return out


#: what an input is written as when no writer takes its own extension (measurement files)
FALLBACK_EXTENSION = ".wav"


def output_name(name: str) -> str:
    """The output file name for an input named ``name``: the same, where a writer takes it.

    Inputs whose extension names no output format (TDMS, EDF, MATLAB, HDF5,
    MDF 4, Excel, ...) are written as ``<stem>.wav``, 32-bit float as from a
    text table.
    """
    from scalesieve.io.writers import AUDIO_FORMAT_BY_EXTENSION, CSV_EXTENSIONS

    stem, ext = os.path.splitext(name)
    if ext.lower() in AUDIO_FORMAT_BY_EXTENSION or ext.lower() in CSV_EXTENSIONS:
        return name
    return stem + FALLBACK_EXTENSION


def plan_outputs(inputs: Sequence[str], outdir: str, force: bool = False) -> list[tuple[str, str]]:
    """Pair every input with OUTDIR/<its name> (see :func:`output_name`); refuse clashes first.

    Returns absolute ``(input, output)`` pairs in the order given.

    Raises
    ------
    ScalesieveError
        No inputs; two inputs sharing a name (compared without case, since
        such names clash on Windows and macOS); an input named like the
        report; an output that is an input; existing outputs without
        ``force``; OUTDIR being a file.
    """
    if not inputs:
        raise ScalesieveError("no input files given")
    if os.path.exists(outdir) and not os.path.isdir(outdir):
        raise ScalesieveError("is a file; -o names the output folder", outdir)
    out_abs = os.path.abspath(outdir)
    seen: dict[str, str] = {}
    pairs = []
    for item in inputs:
        src = os.path.abspath(item)
        name = os.path.basename(src)
        if not name:
            raise ScalesieveError("is not a file name", item)
        if name.casefold() == REPORT_NAME:
            raise ScalesieveError(f"an input may not be named {REPORT_NAME} "
                                  "(the batch writes its report under that name)", item)
        out_name = output_name(name)
        key = out_name.casefold()
        if key in seen:
            raise ScalesieveError(
                f"shares its output name with {seen[key]}; both would be written to "
                f"{os.path.join(out_abs, out_name)} (rename one or run two batches)", item)
        seen[key] = item
        pairs.append((src, os.path.join(out_abs, out_name)))
    existing = []
    for src, dst in pairs:
        if os.path.exists(src) and os.path.exists(dst) and os.path.samefile(src, dst):
            raise ScalesieveError("is an input file; it is never overwritten "
                                  "(choose another output folder)", dst)
        if os.path.lexists(dst) and not force:
            existing.append(dst)
    report = os.path.join(out_abs, REPORT_NAME)
    if os.path.lexists(report) and not force:
        existing.append(report)
    if existing:
        more = f" (and {len(existing) - 1} more)" if len(existing) > 1 else ""
        raise ScalesieveError(f"exists{more}; use --force to replace", existing[0])
    return pairs


def estimate_output_bytes(src: str, dst: str, subtype: str | None = None) -> int:
    """About how many bytes the cleaned ``dst`` of ``src`` takes (for the free-space check).

    Uncompressed audio from an audio input: frames x channels x bytes per
    sample (the subtype asked for, else the input's, else 32-bit float),
    which is what the writer writes.  Everything else (compressed formats,
    text tables) is rougher: the input's own size, or for a CSV output from
    audio, 25 characters a value.
    """
    from scalesieve.io.writers import _BYTES_PER_SAMPLE, CSV_EXTENSIONS

    try:
        size = os.path.getsize(src)
    except OSError:
        return 0            # the job will name the problem
    ext = os.path.splitext(dst)[1].lower()
    try:
        import soundfile as sf

        info = sf.info(src)
    except Exception:       # not audio (a text table), or unreadable: the input's size
        return size
    if ext in CSV_EXTENSIONS:
        return int(info.frames) * (int(info.channels) + 1) * 25
    if ext in (".flac", ".ogg", ".oga"):
        return size
    width = _BYTES_PER_SAMPLE.get((subtype or info.subtype or "FLOAT").upper(), 4)
    return int(info.frames) * int(info.channels) * width + 4096


def check_output_folder(outdir: str, pairs: Sequence[tuple[str, str]],
                        subtype: str | None = None) -> None:
    """Refuse, before any work, an output folder that cannot take the batch's outputs.

    A file is made there and removed (permissions, read-only file systems and
    full disks all show), and the free space is compared with
    :func:`estimate_output_bytes` summed over the inputs (less what the
    outputs being replaced free, plus room for the report).

    Raises
    ------
    ScalesieveError
        One line naming the folder and what is wrong.
    """
    import errno

    from scalesieve.io.folder_room import free_bytes

    # a folder on a filesystem of no size (/proc, /sys) holds no files: said before the probe
    free = free_bytes(outdir, hint="choose another output folder; nothing was cleaned")
    try:
        fd, probe = tempfile.mkstemp(prefix=".scalesieve-probe-", dir=outdir)
        os.close(fd)
        os.unlink(probe)
    except OSError as exc:
        why = {errno.ENOSPC: "no disk space left", errno.EACCES: "permission denied",
               errno.EPERM: "permission denied", errno.EROFS: "read-only file system",
               errno.EDQUOT: "disk quota exceeded"}.get(exc.errno, exc.strerror or str(exc))
        raise ScalesieveError(f"cannot write in the output folder ({why}); nothing was "
                              "cleaned", outdir) from None
    need = 1 << 20          # the report, and slack for headers
    for src, dst in pairs:
        need += estimate_output_bytes(src, dst, subtype)
        try:
            need -= os.path.getsize(dst)        # replaced with --force: its room comes back
        except OSError:
            pass
    if free is not None and free < need:
        raise ScalesieveError(
            f"not enough disk space for the outputs: about {need / 1e6:.3g} MB needed, "
            f"{free / 1e6:.3g} MB free; nothing was cleaned", outdir)
