"""User preferences (QSettings) behind one small wrapper with key constants.

QSettings read back from disk returns text for numbers and booleans unless ``type=`` is
given (ENGINEERING-NOTES), so every read here names its type. ``LOPSIDE_SETTINGS_DIR``
points the settings at another folder (tests use it to keep the user's own untouched).
"""

from __future__ import annotations

import os
from pathlib import Path

from PySide6.QtCore import QByteArray, QSettings, QStandardPaths

GEOMETRY = "window/geometry"
WINDOW_STATE = "window/state"
SPLITTER = "window/splitter"
#: the screen and scale the geometry was saved on (see screen_fit.py)
SCREEN = "window/screen"
VIEW_TAB = "window/view_tab"
RECENT_FILES = "files/recent"
LAST_FOLDER = "files/last_folder"
ENTRY_MODE = "table/entry_mode"
FUNNEL_PREFIX = "funnel/"
MAX_RECENT = 8


class Prefs:
    """Typed access to the user's preferences."""

    def __init__(self, settings: QSettings | None = None) -> None:
        if settings is None:
            folder = os.environ.get("LOPSIDE_SETTINGS_DIR")
            if folder:
                Path(folder).mkdir(parents=True, exist_ok=True)
                settings = QSettings(str(Path(folder) / "lopside.ini"), QSettings.IniFormat)
            else:
                settings = QSettings()
        self.qs = settings

    def get_str(self, key: str, default: str = "") -> str:
        return str(self.qs.value(key, default, type=str))

    def get_bool(self, key: str, default: bool = False) -> bool:
        return bool(self.qs.value(key, default, type=bool))

    def get_int(self, key: str, default: int = 0) -> int:
        return int(self.qs.value(key, default, type=int))

    def get_bytes(self, key: str) -> QByteArray | None:
        v = self.qs.value(key, None, type=QByteArray)
        return v if v is not None and not v.isEmpty() else None

    def get_list(self, key: str) -> list[str]:
        # type=list turns the one-item case (stored as plain text) back into a list
        v = self.qs.value(key, [], type=list)
        return [str(x) for x in v if str(x)]

    def set(self, key: str, value) -> None:
        self.qs.setValue(key, value)

    def sync(self) -> None:
        self.qs.sync()

    # recent files ---------------------------------------------------------

    def recent_files(self) -> list[str]:
        return self.get_list(RECENT_FILES)

    def add_recent(self, path: str | os.PathLike) -> list[str]:
        # absolute but not resolved: resolve() turns a mapped drive (H:\) into a UNC path
        p = os.path.abspath(path)
        items = [x for x in self.recent_files() if x != p]
        items.insert(0, p)
        items = items[:MAX_RECENT]
        self.set(RECENT_FILES, items)
        return items

    def remove_recent(self, path: str) -> None:
        self.set(RECENT_FILES, [x for x in self.recent_files() if x != path])

    def last_folder(self) -> str:
        d = self.get_str(LAST_FOLDER)
        if d and Path(d).is_dir():
            return d
        return QStandardPaths.writableLocation(QStandardPaths.DocumentsLocation)
