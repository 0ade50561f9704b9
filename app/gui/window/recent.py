"""The app's own folder (recent files, autosaved decisions) and the recent-files list.

The folder is ``$UPSTROKE_CONFIG_DIR`` when set (tests and shared machines use it), otherwise
Qt's per-user configuration location for the app.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

from analysis.results import write_text_atomic

__all__ = ["config_dir", "RecentFiles", "MAX_RECENT"]

MAX_RECENT = 12


def config_dir() -> Path:
    """The app's configuration folder, created when missing."""
    env = os.environ.get("UPSTROKE_CONFIG_DIR")
    if env:
        path = Path(env)
    else:
        from PySide6.QtCore import QStandardPaths

        base = QStandardPaths.writableLocation(QStandardPaths.AppConfigLocation)
        path = Path(base) if base else Path.home() / ".config" / "upstroke"
    path.mkdir(parents=True, exist_ok=True)
    return path


class RecentFiles:
    """Most-recently opened files, newest first, kept in ``recent.json`` in :func:`config_dir`."""

    def __init__(self, folder: Path | None = None) -> None:
        self.path = (folder or config_dir()) / "recent.json"

    def load(self) -> list[str]:
        try:
            items = json.loads(self.path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return []
        return [str(p) for p in items if isinstance(p, str)][:MAX_RECENT] if isinstance(items, list) else []

    def add(self, file_path: str | os.PathLike) -> list[str]:
        """Put a file first (once) and save; returns the new list."""
        full = str(Path(file_path).resolve())
        items = [full] + [p for p in self.load() if p != full]
        items = items[:MAX_RECENT]
        self.path.parent.mkdir(parents=True, exist_ok=True)
        write_text_atomic(self.path, json.dumps(items, indent=1))
        return items

    def existing(self) -> list[str]:
        """The list without files that have since gone."""
        return [p for p in self.load() if Path(p).exists()]
