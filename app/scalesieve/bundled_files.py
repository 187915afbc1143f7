"""Where the demo recording and the window's resources are: one place, no Qt.

An installed Scalesieve carries them as the packages ``scalesieve.resources``
and ``scalesieve.sample_signals`` (see pyproject.toml), found through
:mod:`importlib.resources`; a source checkout keeps them in ``resources/`` and
``sample_signals/`` at the top of the tree, two levels above the package.
"""

from __future__ import annotations

import importlib.resources
import os

#: the recording the window opens when no FILE is given
DEMO_NAME = "pump_bearing.wav"


def _folder(package: str, checkout_name: str) -> str | None:
    """The folder of an installed data package, else the checkout's own folder."""
    try:
        found = importlib.resources.files(package)
        if isinstance(found, os.PathLike) and os.path.isdir(os.fspath(found)):
            return os.fspath(found)
    except ModuleNotFoundError:
        pass
    here = os.fspath(importlib.resources.files("scalesieve"))
    cand = os.path.normpath(os.path.join(here, "..", "..", checkout_name))
    return cand if os.path.isdir(cand) else None


def sample_signals_dir() -> str | None:
    """The folder of the demo recordings, or None in an installation without them."""
    return _folder("scalesieve.sample_signals", "sample_signals")


def demo_path() -> str:
    """The bundled demo recording, or ``""`` when there is none."""
    folder = sample_signals_dir()
    if folder is None:
        return ""
    path = os.path.join(folder, DEMO_NAME)
    return path if os.path.isfile(path) else ""


def resource_dir() -> str | None:
    """The window's resources folder (``palette.json`` in it), or None.

    ``$SCALESIEVE_RESOURCES`` names another folder to use.
    """
    for cand in (os.environ.get("SCALESIEVE_RESOURCES", ""),
                 _folder("scalesieve.resources", "resources") or ""):
        if cand and os.path.isfile(os.path.join(cand, "palette.json")):
            return os.path.normpath(cand)
    return None
