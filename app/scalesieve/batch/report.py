"""The batch report: versions that decide the numbers, times, and its atomic write."""

from __future__ import annotations

import datetime
import platform

from scalesieve import __version__


def versions(cluster: bool = False) -> dict:
    """Versions that decide the numbers, for the report."""
    import numpy
    import pywt

    v = {"scalesieve": __version__, "python": platform.python_version(),
         "numpy": numpy.__version__, "pywavelets": pywt.__version__,
         "platform": platform.platform()}
    try:
        import soundfile

        v["soundfile"] = soundfile.__version__
        v["libsndfile"] = soundfile.__libsndfile_version__
    except (ImportError, OSError, AttributeError):
        pass
    if cluster:
        import dask
        import distributed

        v["dask"] = dask.__version__
        v["distributed"] = distributed.__version__
    return v


def _now() -> str:
    return datetime.datetime.now(datetime.timezone.utc).astimezone().isoformat(timespec="seconds")


def _write_bytes(path: str, data: bytes) -> None:
    with open(path, "wb") as fh:
        fh.write(data)


def write_report(path: str, report: dict, force: bool = False) -> None:
    import json

    from scalesieve.io.atomic import atomic_write

    text = json.dumps(report, indent=1, allow_nan=False)
    atomic_write(path, lambda tmp: _write_bytes(tmp, (text + "\n").encode("utf-8")),
                 force=force)
