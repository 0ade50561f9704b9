"""Bad settings files (TOML): filled in once the analysis command takes ``--settings``."""

from __future__ import annotations

from pathlib import Path

from .make_corpus import Case


def build(folder: Path) -> list[Case]:
    """The settings cases, written into ``folder``."""
    return []
