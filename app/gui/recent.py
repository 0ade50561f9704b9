"""The app's own folder (recent files, autosaved decisions) and the recent-files list.

The folder is ``$UPSTROKE_CONFIG_DIR`` when set (tests and shared machines use it), otherwise
Qt's per-user configuration location for the app.
"""

from __future__ import annotations

import contextlib
import json
import os
import tempfile
from pathlib import Path

__all__ = ["config_dir", "RecentFiles", "MAX_RECENT", "write_text_replacing"]

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


def write_text_replacing(path: Path, text: str) -> None:
    """Write a small file through a temporary file and a rename, so a crash leaves the old one."""
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.remove(tmp)
        raise


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
        write_text_replacing(self.path, json.dumps(items, indent=1))
        return items

    def existing(self) -> list[str]:
        """The list without files that have since gone."""
        return [p for p in self.load() if Path(p).exists()]
