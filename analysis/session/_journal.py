"""The review's journal: every change written to disk at once, so a crash loses no decision.

A journal holds one recording's unsaved review: its settings, conditions and whole decision log,
as one small JSON file. The app writes it after every decision, condition or settings change
(before any view redraws), deletes it when the review is saved or knowingly discarded, and at
its next start offers every journal left behind (:func:`pending_reviews`). Opening the same
recording or results file again replays it onto the fresh session (:meth:`Journal.restore`).

Durability
----------
:meth:`Journal.write` writes a temporary file in the journal's folder, flushes it, ``fsync``\\ s
it, renames it over the journal (:func:`os.replace`, atomic) and ``fsync``\\ s the folder, all
before it returns. A decision is *confirmed* once the ``write`` that follows it has returned: a
kill (even ``kill -9``) or a crash at any moment leaves either the previous journal or the new
one, whole, and never loses a confirmed decision. Temporary files a killed process left behind
(``.NAME.tmp-PID-...``) are removed by the next write once that process is gone.

API (Qt-free; the app's :mod:`app.gui.autosave` adds its default folder)
------------------------------------------------------------------------
``Journal(origin, key, folder)``
    The journal of the recording ``key`` of a session opened from ``origin`` (the results file,
    or the recording's path); its file is ``folder / (16 hex digits).json``.
``journal.write(session)``, ``journal.exists()``, ``journal.discard()``
``journal.review() -> JournalReview | None``
    What the journal holds (settings, conditions, decision log), None when absent or written for
    another recording. Raises :class:`JournalError` on a damaged journal (it is kept).
``journal.restore(session, progress=None) -> RestoreReport | None``
    Replays it in one call: settings first (re-analysing here, reporting ``progress(fraction,
    message)``), then conditions and verdicts. An app with a GUI thread re-analyses in a worker
    instead (:meth:`~analysis.session.Session.settings_job`) and then calls
    ``journal.replay(session, review, settings_changed=True)``.
``with journal.replaying(session): ...``
    Holds writes while a restore is under way (so a half-restored review never replaces the
    journal) and writes once at the end if any were held.
``pending_reviews(folder) -> list[PendingReview]``
    Every journal of the folder, newest first.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import math
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Iterator

import numpy as np

from analysis.conditions import Condition, ConditionError, SteadyState
from analysis.decisions import ACCEPT, CLEAR, DecisionLog, now_utc
from analysis.errors import InputError
from analysis.results import fsync_folder, remove_stale_temps, temp_prefix
from analysis.session._session import Session
from analysis.settings import Settings

__all__ = [
    "JOURNAL_VERSION", "Journal", "JournalError", "JournalReview", "PendingReview", "RestoreReport",
    "pending_reviews", "write_durably",
]

JOURNAL_VERSION = 1


class JournalError(InputError):
    """An autosave journal cannot be read back (damaged, or written by a newer version)."""


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


@dataclass(frozen=True)
class JournalReview:
    """The review a journal holds: settings, conditions and the whole decision log."""

    origin: str
    key: str
    written_utc: str
    settings: Any
    conditions: tuple[Condition, ...]
    decisions: DecisionLog


def pending_reviews(folder: str | os.PathLike) -> list[PendingReview]:
    """Every journal in ``folder``, newest first: what an app offers to recover at start.

    Opening a journal's ``origin`` again and replaying it (:meth:`Journal.restore`) recovers it;
    unreadable journals are skipped, never deleted.
    """
    where = Path(folder)
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


def write_durably(path: str | os.PathLike, text: str) -> None:
    """Write a small text file so that, once this returns, it survives a kill or a crash.

    Through a temporary file in the same folder (flushed and fsynced), an atomic rename and an
    fsync of the folder: a kill at any moment leaves the previous file or the new one, whole.

    Raises
    ------
    OSError
        When the folder cannot be written; the previous file is then untouched.
    """
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    remove_stale_temps(target)  # left by a killed process
    fd, tmp = tempfile.mkstemp(prefix=f"{temp_prefix(target)}{os.getpid()}-", dir=target.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, target)
    except BaseException:
        with contextlib.suppress(OSError):
            os.remove(tmp)
        raise
    fsync_folder(target.parent)


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
    folder : str or path
        Where journals go (the app uses ``autosave/`` in its own folder).
    """

    def __init__(self, origin: str, key: str, folder: str | os.PathLike) -> None:
        digest = hashlib.sha256(f"{os.path.abspath(origin)}\n{key}".encode("utf-8")).hexdigest()[:16]
        self.path = Path(folder) / f"{digest}.json"
        self.origin = origin
        self.key = key
        self._held: int = 0
        self._missed = False

    def exists(self) -> bool:
        return self.path.is_file()

    def write(self, session: Session) -> None:
        """Write the recording's review (settings, conditions, decision log), durably, now.

        While :meth:`replaying` holds writes this only notes that one is due.
        """
        if self._held:
            self._missed = True
            return
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
            "decisions": {k: arr.tolist() for k, arr in log.items()},
        }
        # Compact, so that json's C encoder writes it: the log grows with every verdict, and
        # the journal is written after each one.
        write_durably(self.path, json.dumps(data, separators=(",", ":"), allow_nan=False))

    def discard(self) -> None:
        with contextlib.suppress(FileNotFoundError):
            self.path.unlink()

    def read(self) -> dict[str, Any] | None:
        """The journal's raw content, or None when absent, unreadable or for something else."""
        try:
            data = json.loads(self.path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return None
        if not isinstance(data, dict) or data.get("journal_version") != JOURNAL_VERSION or data.get("key") != self.key:
            return None
        return data

    def review(self) -> JournalReview | None:
        """What the journal holds; None when there is none for this recording.

        Raises
        ------
        JournalError
            When its settings, conditions or decisions cannot be read back (the journal is kept).
        """
        data = self.read()
        if data is None:
            return None

        try:
            settings = Settings.from_dict(data["settings"])
            conditions = tuple(
                Condition(c["name"], c["start"], math.inf if c["end"] == "inf" else c["end"], c["unit"],
                          SteadyState(c["steady_kind"], c["steady_value"]))
                for c in data["conditions"]
            )
            cols = data["decisions"]
            log = (DecisionLog.from_columns({k: np.asarray(v, dtype=object) for k, v in cols.items()})
                   if cols.get("sweep") else DecisionLog())
        except (InputError, ConditionError, KeyError, TypeError, ValueError, AttributeError) as exc:
            problem = exc.problem if isinstance(exc, InputError) else f"{type(exc).__name__}: {exc}"
            raise JournalError(self.path, f"the autosaved review cannot be read ({problem})",
                               "it was kept; delete it to stop this message") from None
        return JournalReview(str(data.get("origin", "")), self.key, str(data.get("written_utc", "")),
                             settings, conditions, log)

    @contextlib.contextmanager
    def replaying(self, session: Session) -> Iterator[None]:
        """Hold writes until the block ends, then write once if any were asked for.

        A restore changes settings, conditions and verdicts one after another; a journal written
        in between would hold half the review. If the block fails the journal stays as it was.
        """
        self._held += 1
        try:
            yield
        finally:
            self._held -= 1
        if not self._held and self._missed:
            self._missed = False
            self.write(session)

    def restore(self, session: Session, *, progress: Callable[[float, str], None] | None = None) -> RestoreReport | None:
        """Replay the journal onto the session in one call; None when there is nothing to replay.

        Settings differing from the session's are applied first, re-analysing on this thread
        (with ``progress``), so the decisions then land on the beats they were made on. An app
        re-analyses in a worker instead and calls :meth:`replay` (see the module docstring).
        """
        review = self.review()
        if review is None:
            return None
        with self.replaying(session):
            changed = review.settings != session.settings(self.key)
            if changed:
                session.apply_settings(session.prepare_settings(review.settings, [self.key], progress=progress))
            return self.replay(session, review, settings_changed=changed)

    def replay(self, session: Session, review: JournalReview, *, settings_changed: bool = False) -> RestoreReport | None:
        """Put the journal's conditions and verdicts onto the session (its settings already are).

        Only beats whose journalled verdict differs from the session's are decided, grouped by
        verdict and reason, as undoable steps. None when nothing differed.
        """
        with self.replaying(session):
            n_conditions = 0
            if review.conditions != tuple(session.conditions(self.key)):
                session.set_conditions(self.key, review.conditions)
                n_conditions = len(review.conditions)
            beats = session.beats(self.key)
            verdict, reason = review.decisions.state(np.asarray(beats["sweep"], dtype=np.int64),
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
                same = reviewed[r] and int(beats["accepted"][r]) == v and (
                    v == ACCEPT or str(beats["reject_reason"][r]) == str(reason[r]))
                if not same:
                    groups.setdefault((v, "" if v == ACCEPT else str(reason[r])), []).append(r)
            n_decided = 0
            for (v, why), rows in groups.items():
                session.decide(self.key, rows, None if v == CLEAR else bool(v == ACCEPT), why)
                n_decided += len(rows)
        if not (n_decided or n_conditions or settings_changed):
            return None
        return RestoreReport(n_decided, n_conditions, settings_changed, review.written_utc)
