"""Find and load the window's resources: style sheet, icons, colours.

They live in the top-level ``resources/`` folder of a source checkout (two
levels above the package).  An installation without that folder still
works: built-in colours, Qt's default style and text-only buttons.
"""

from __future__ import annotations

import copy
import json
import os
from functools import lru_cache


#: colours used when resources/palette.json is missing or incomplete
DEFAULT_PALETTE = {
    "colour_maps": [{"name": "viridis", "label": "Viridis"},
                    {"name": "cividis", "label": "Cividis"},
                    {"name": "magma", "label": "Magma"},
                    {"name": "inferno", "label": "Inferno"}],
    "default_colour_map": "viridis",
    "plot": {"background": "#fbfbf9", "foreground": "#2f3338", "grid": "#e4e4df",
             "zero": "#cfcfc8", "overview_region": "#0072b233"},
    "traces": {"original": "#767b83", "cleaned": "#0072b2", "removed": "#d55e00",
               "band": "#1f5c8f", "band_muted": "#a7abb1", "band_original": "#cdd1d6",
               "threshold": "#b4367f", "region": "#ffffff", "region_shadow": "#1b1b1b",
               "region_selected": "#ffb000", "crosshair": "#f2f2f2"},
}
# Only maps that are perceptually uniform may be offered (no rainbow maps).
PERCEPTUAL_MAPS = ("viridis", "cividis", "magma", "inferno", "plasma")


def resource_dir() -> str | None:
    """The resources folder, or ``None`` when there is none (``scalesieve.bundled_files``)."""
    from scalesieve.bundled_files import resource_dir as _find

    return _find()


def resource_path(*parts: str) -> str | None:
    base = resource_dir()
    if base is None:
        return None
    p = os.path.join(base, *parts)
    return p if os.path.exists(p) else None


@lru_cache(maxsize=1)
def palette() -> dict:
    """Colours and colour-map choices (file values over the built-in ones)."""
    pal = copy.deepcopy(DEFAULT_PALETTE)
    p = resource_path("palette.json")
    if p:
        try:
            with open(p, encoding="utf-8") as fh:
                data = json.load(fh)
        except (OSError, ValueError):
            data = {}
        for key in ("plot", "traces"):
            if isinstance(data.get(key), dict):
                pal[key].update({k: v for k, v in data[key].items() if isinstance(v, str)})
        maps = [m for m in data.get("colour_maps", []) if isinstance(m, dict)
                and m.get("name") in PERCEPTUAL_MAPS]
        if maps:
            pal["colour_maps"] = maps
        if data.get("default_colour_map") in PERCEPTUAL_MAPS:
            pal["default_colour_map"] = data["default_colour_map"]
    return pal


def colour(group: str, name: str) -> str:
    return palette()[group][name]


def style_sheet() -> str:
    p = resource_path("style.qss")
    if not p:
        return ""
    try:
        with open(p, encoding="utf-8") as fh:
            return fh.read()
    except OSError:
        return ""


def icon(name: str):
    """A QIcon from resources/icons/NAME.svg (an empty icon when missing)."""
    from PySide6.QtGui import QIcon

    p = resource_path("icons", f"{name}.svg")
    return QIcon(p) if p else QIcon()
