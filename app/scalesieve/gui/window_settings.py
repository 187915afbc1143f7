"""What the window remembers between sessions (QSettings): geometry, folder, recent files."""

from __future__ import annotations

import os

from PySide6.QtCore import QSettings

RECENT_MAX = 8


def open_settings(path: str | None = None) -> QSettings:
    """The user's settings, or an INI file at ``path`` (tests keep theirs apart)."""
    if path:
        return QSettings(path, QSettings.Format.IniFormat)
    return QSettings("Scalesieve", "Scalesieve")


def recent_files(s: QSettings) -> list[str]:
    v = s.value("files/recent", [])
    if isinstance(v, str):
        v = [v]
    return [p for p in (v or []) if isinstance(p, str)]


def add_recent(s: QSettings, path: str) -> list[str]:
    p = os.path.abspath(path)
    items = [q for q in recent_files(s) if q != p]
    items.insert(0, p)
    del items[RECENT_MAX:]
    s.setValue("files/recent", items)
    return items


def last_folder(s: QSettings) -> str:
    v = s.value("files/folder", "")
    return v if isinstance(v, str) and os.path.isdir(v) else os.getcwd()


def set_last_folder(s: QSettings, path: str) -> None:
    folder = path if os.path.isdir(path) else os.path.dirname(os.path.abspath(path))
    s.setValue("files/folder", folder)
