"""Autosave of the review: a small journal written after every change, so a crash loses nothing.

After each decision, condition or settings change the app writes one JSON journal per recording
into ``autosave/`` of the app's folder (through a temporary file and a rename, so a crash mid-write
leaves the previous journal). A clean close or a save deletes it. When the same recording (or
results file) is opened again and a journal is there, the review it holds is replayed onto the
fresh session: settings, conditions, then every beat whose verdict differs, as undoable steps.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from analysis.conditions import Condition, SteadyState
from analysis.decisions import ACCEPT, CLEAR, DecisionLog, now_utc
from analysis.session import Session

from .recent import config_dir, write_text_replacing

__all__ = ["Journal", "PendingReview", "RestoreReport", "JOURNAL_VERSION", "pending_reviews"]

JOURNAL_VERSION = 1


@dataclass(frozen=True)
class RestoreReport:
    """What replaying a journal changed."""

    decisions: int
    conditions: int
    settings_changed: bool
    written_utc: str

    def text(self) -> str:
        parts = [f"{self.decisions} beat verdict(s)", f"{self.conditions} condition(s)"]
        if self.settings_changed:
            parts.append("settings")
        return f"restored the unsaved review of {self.written_utc}: " + ", ".join(parts)


@dataclass(frozen=True)
class PendingReview:
    """An autosave journal left by a session that ended without saving (a crash, a kill)."""

    origin: str
    key: str
    written_utc: str
    decisions: int
    path: Path

    def text(self) -> str:
        return f"{self.origin}: an unsaved review of {self.written_utc} ({self.decisions} decision(s))"


def pending_reviews(folder: Path | None = None) -> list[PendingReview]:
    """Every journal in the autosave folder, newest first: what the app offers to recover at start.

    Opening a journal's ``origin`` again replays it (:meth:`Journal.restore`); unreadable
    journals are skipped, never deleted.
    """
    where = folder or config_dir() / "autosave"
    found = []
    for path in sorted(where.glob("*.json")) if where.is_dir() else ():
        try:
            data = json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            continue
        if not isinstance(data, dict) or data.get("journal_version") != JOURNAL_VERSION:
            continue
        sweeps = (data.get("decisions") or {}).get("sweep") or []
        found.append(PendingReview(str(data.get("origin", "")), str(data.get("key", "")),
                                   str(data.get("written_utc", "")), len(sweeps), path))
    return sorted(found, key=lambda p: p.written_utc, reverse=True)


def _finite(x: float) -> float | str:
    return x if math.isfinite(x) else "inf"


class Journal:
    """The autosave journal of one recording in a session.

    Parameters
    ----------
    origin : str
        What was opened: the results file, or the recording's source path.
    key : str
        The recording's key in the session.
    folder : Path or None
        Where journals go (default: ``autosave`` in :func:`~app.gui.recent.config_dir`).
    """

    def __init__(self, origin: str, key: str, folder: Path | None = None) -> None:
        digest = hashlib.sha256(f"{os.path.abspath(origin)}\n{key}".encode("utf-8")).hexdigest()[:16]
        self.path = (folder or config_dir() / "autosave") / f"{digest}.json"
        self.origin = origin
        self.key = key

    def exists(self) -> bool:
        return self.path.is_file()

    def write(self, session: Session) -> None:
        """Write the recording's review (settings, conditions, decision log) now."""
        log = session.decisions(self.key).columns()
        data = {
            "journal_version": JOURNAL_VERSION,
            "origin": os.path.abspath(self.origin),
            "key": self.key,
            "written_utc": now_utc(),
            "settings": session.settings(self.key).to_dict(),
            "conditions": [
                {"name": c.name, "start": c.start, "end": _finite(c.end), "unit": c.unit,
                 "steady_kind": c.steady.kind, "steady_value": c.steady.value}
                for c in session.conditions(self.key)
            ],
            "decisions": {k: [v.item() if hasattr(v, "item") else v for v in arr] for k, arr in log.items()},
        }
        write_text_replacing(self.path, json.dumps(data, indent=0, allow_nan=False))

    def discard(self) -> None:
        try:
            self.path.unlink()
        except FileNotFoundError:
            pass

    def read(self) -> dict[str, Any] | None:
        """The journal's content, or None when absent, unreadable or for something else."""
        try:
            data = json.loads(self.path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return None
        if not isinstance(data, dict) or data.get("journal_version") != JOURNAL_VERSION or data.get("key") != self.key:
            return None
        return data

    def restore(self, session: Session) -> RestoreReport | None:
        """Replay the journal onto the session; None when there is nothing to replay.

        Settings differing from the session's are re-analysed first (on this thread), so the
        decisions then land on the beats they were made on.
        """
        data = self.read()
        if data is None:
            return None
        from analysis.settings import Settings

        settings_changed = False
        settings = Settings.from_dict(data["settings"])
        if settings != session.settings(self.key):
            session.set_settings(settings, [self.key])
            settings_changed = True
        conditions = [
            Condition(c["name"], c["start"], math.inf if c["end"] == "inf" else c["end"], c["unit"],
                      SteadyState(c["steady_kind"], c["steady_value"]))
            for c in data["conditions"]
        ]
        n_conditions = 0
        if tuple(conditions) != tuple(session.conditions(self.key)):
            session.set_conditions(self.key, conditions)
            n_conditions = len(conditions)
        cols = data["decisions"]
        log = DecisionLog.from_columns({k: np.asarray(v, dtype=object) for k, v in cols.items()}) if cols.get("sweep") else DecisionLog()
        beats = session.beats(self.key)
        verdict, reason = log.state(np.asarray(beats["sweep"], dtype=np.int64),
                                    np.asarray(beats["t_upstroke_s"], dtype=np.float64),
                                    tolerance_s=session.match_tolerance_s)
        # Group the rows whose journalled verdict differs from the session's by (verdict, reason).
        groups: dict[tuple[int, str], list[int]] = {}
        reviewed = np.asarray(beats["reviewed"]) if "reviewed" in beats else np.zeros(len(beats), np.int64)
        for r in range(len(beats)):
            v = int(verdict[r])
            if v == CLEAR:
                if reviewed[r]:
                    groups.setdefault((CLEAR, ""), []).append(r)
                continue
            same = reviewed[r] and int(beats["accepted"][r]) == v and (v == ACCEPT or str(beats["reject_reason"][r]) == str(reason[r]))
            if not same:
                groups.setdefault((v, "" if v == ACCEPT else str(reason[r])), []).append(r)
        n_decided = 0
        for (v, why), rows in groups.items():
            session.decide(self.key, rows, None if v == CLEAR else bool(v == ACCEPT), why)
            n_decided += len(rows)
        if not (n_decided or n_conditions or settings_changed):
            return None
        return RestoreReport(n_decided, n_conditions, settings_changed, str(data.get("written_utc", "")))
