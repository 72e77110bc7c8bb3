"""Persistent window settings (QSettings, INI format), in one versioned schema.

What is kept: window geometry and dock state, splitter positions, the recent scenario
files and the last folders used per kind of file dialog. Tests and the screenshot mode
redirect the whole store to a temporary folder with :func:`use_settings_folder` (or the
``ACQPLAN_SETTINGS_DIR`` environment variable) so the user's real settings are never read
or written.
"""

from __future__ import annotations

import os
from pathlib import Path

from PySide6.QtCore import QByteArray, QSettings

ORGANISATION = "acqplan-project"
APPLICATION = "acqplan-planner"
SCHEMA_VERSION = 1
MAX_RECENT = 8
ENV_FOLDER = "ACQPLAN_SETTINGS_DIR"

_redirected: Path | None = None


def use_settings_folder(folder: str | os.PathLike[str]) -> Path:
    """Keep every setting of this process in INI files under ``folder``."""
    global _redirected
    path = Path(folder)
    path.mkdir(parents=True, exist_ok=True)
    for scope in (QSettings.Scope.UserScope, QSettings.Scope.SystemScope):
        QSettings.setPath(QSettings.Format.IniFormat, scope, str(path))
    _redirected = path
    return path


def settings_folder() -> Path | None:
    """The redirected folder, or None when the platform's user location is used."""
    return _redirected


def open_settings() -> QSettings:
    """The application's settings store (INI format, user scope)."""
    if _redirected is None and os.environ.get(ENV_FOLDER):
        use_settings_folder(os.environ[ENV_FOLDER])
    return QSettings(QSettings.Format.IniFormat, QSettings.Scope.UserScope, ORGANISATION,
                     APPLICATION)


class PlannerSettings:
    """Typed access to the stored values, with the schema version checked once."""

    def __init__(self, store: QSettings | None = None):
        self.store = store if store is not None else open_settings()
        version = self._int("schema", 0)
        if version > SCHEMA_VERSION:
            # Written by a newer acqplan: do not restore a layout we may misread.
            self.store.remove("window")
        if version != SCHEMA_VERSION:
            self.store.setValue("schema", SCHEMA_VERSION)

    def _int(self, key: str, default: int) -> int:
        try:
            return int(self.store.value(key, default))
        except (TypeError, ValueError):
            return default

    # -- recent files ---------------------------------------------------------------
    def recent_files(self) -> list[str]:
        value = self.store.value("files/recent", [])
        if isinstance(value, str):
            value = [value] if value else []
        return [str(v) for v in (value or []) if str(v)]

    def add_recent(self, path: str | os.PathLike[str]) -> list[str]:
        p = str(Path(path).resolve())
        files = [p] + [f for f in self.recent_files() if f != p]
        files = files[:MAX_RECENT]
        self.store.setValue("files/recent", files)
        return files

    def remove_recent(self, path: str) -> list[str]:
        files = [f for f in self.recent_files() if f != path]
        self.store.setValue("files/recent", files)
        return files

    def clear_recent(self) -> None:
        self.store.setValue("files/recent", [])

    # -- last folders ----------------------------------------------------------------
    def last_folder(self, kind: str) -> str:
        value = str(self.store.value(f"folders/{kind}", "") or "")
        return value if value and Path(value).is_dir() else str(Path.home())

    def set_last_folder(self, kind: str, path: str | os.PathLike[str]) -> None:
        p = Path(path)
        folder = p if p.is_dir() else p.parent
        self.store.setValue(f"folders/{kind}", str(folder))

    # -- window layout -------------------------------------------------------------
    def byte_array(self, key: str) -> QByteArray | None:
        value = self.store.value(f"window/{key}")
        return value if isinstance(value, QByteArray) and not value.isEmpty() else None

    def set_byte_array(self, key: str, value: QByteArray) -> None:
        self.store.setValue(f"window/{key}", value)

    def sync(self) -> None:
        self.store.sync()
