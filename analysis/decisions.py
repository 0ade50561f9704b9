"""Review decisions: an append-only log of accept/reject verdicts on beats.

Every review action appends entries; nothing is ever removed, so the log is also the audit trail
of the review (who did what when, as far as a single user's file can say). A beat is named by its
sweep and its upstroke time, not by its row, so that a decision survives a re-analysis that adds
or removes other beats: it applies to the beat of the same sweep whose upstroke lies nearest, if
within a tolerance. The latest entry that applies to a beat wins.

Entry fields
------------
sweep, beat : int
    Where the beat was when the decision was made (``beat`` is informative only).
t_upstroke_s : float
    The beat's upstroke time from the start of its sweep; what matching uses.
accepted : int
    1 accept, 0 reject, -1 clear (back to the automatic verdict of the quality rules).
reason : str
    Why (for a rejection); free text.
time_utc : str
    When, ISO 8601 in UTC.
action : str
    ``"review"`` for a user's verdict, ``"undo"`` / ``"redo"`` for entries the undo stack wrote
    to restore an earlier state.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from datetime import datetime, timezone
from typing import Iterable, Sequence

import numpy as np

from analysis.errors import InputError

__all__ = ["ACCEPT", "CLEAR", "REJECT", "REPRODUCIBLE_CLOCK_ENV", "Decision", "DecisionLog", "now_utc"]

ACCEPT, REJECT, CLEAR = 1, 0, -1
#: Field names, in the order the results file stores them.
FIELDS = ("sweep", "beat", "t_upstroke_s", "accepted", "reason", "time_utc", "action")


#: The environment variable of reproducible builds (reproducible-builds.org's SOURCE_DATE_EPOCH
#: specification): whole seconds since 1970-01-01 UTC that stand in for "now".
REPRODUCIBLE_CLOCK_ENV = "SOURCE_DATE_EPOCH"


def now_utc() -> str:
    """The current time as ISO 8601 in UTC, to the millisecond.

    With ``SOURCE_DATE_EPOCH`` set (reproducible mode), that time instead: every clock reading a
    results file stores (when a recording was analysed, when a decision was made) is then fixed,
    and two runs on the same input write identical bytes.

    Raises
    ------
    InputError
        When ``SOURCE_DATE_EPOCH`` is set but not a whole number of seconds (the specification
        asks tools to stop rather than guess).
    """
    fixed = os.environ.get(REPRODUCIBLE_CLOCK_ENV)
    if fixed is None:
        moment = datetime.now(timezone.utc)
    else:
        text = fixed.strip()
        try:
            if not text.isdigit():
                raise ValueError(text)
            moment = datetime.fromtimestamp(int(text), timezone.utc)
        except (ValueError, OverflowError, OSError):
            raise InputError(
                None, f"{REPRODUCIBLE_CLOCK_ENV}={fixed[:40]!r} is not a whole number of seconds since 1970",
                "set it to an integer such as 1767225600, or unset it to record the real time",
            ) from None
    return moment.isoformat(timespec="milliseconds").replace("+00:00", "Z")


@dataclass(frozen=True)
class Decision:
    """One log entry; see the module docstring for the fields."""

    sweep: int
    beat: int
    t_upstroke_s: float
    accepted: int
    reason: str = ""
    time_utc: str = ""
    action: str = "review"

    def __post_init__(self) -> None:
        if self.accepted not in (ACCEPT, REJECT, CLEAR):
            raise ValueError(f"accepted must be 1, 0 or -1, not {self.accepted!r}")


class DecisionLog:
    """An append-only sequence of :class:`Decision` entries.

    Examples
    --------
    >>> log = DecisionLog()
    >>> log.append([Decision(0, 3, 2.5012, REJECT, "spike artefact", "2024-01-01T00:00:00.000Z")])
    >>> len(log), log[0].reason
    (1, 'spike artefact')
    """

    __slots__ = ("_entries",)

    def __init__(self, entries: Iterable[Decision] = ()) -> None:
        self._entries: list[Decision] = list(entries)

    def __len__(self) -> int:
        return len(self._entries)

    def __getitem__(self, i: int) -> Decision:
        return self._entries[i]

    def __iter__(self):
        return iter(self._entries)

    def __eq__(self, other: object) -> bool:
        return isinstance(other, DecisionLog) and self._entries == other._entries

    def append(self, entries: Sequence[Decision]) -> None:
        """Add entries at the end (the log never shrinks)."""
        self._entries.extend(entries)

    def copy(self) -> "DecisionLog":
        return DecisionLog(self._entries)

    def columns(self) -> dict[str, np.ndarray]:
        """The log as equal-length column arrays, in :data:`FIELDS` order."""
        e = self._entries
        return {
            "sweep": np.array([d.sweep for d in e], dtype=np.int64),
            "beat": np.array([d.beat for d in e], dtype=np.int64),
            "t_upstroke_s": np.array([d.t_upstroke_s for d in e], dtype=np.float64),
            "accepted": np.array([d.accepted for d in e], dtype=np.int64),
            "reason": np.array([d.reason for d in e], dtype=object),
            "time_utc": np.array([d.time_utc for d in e], dtype=object),
            "action": np.array([d.action for d in e], dtype=object),
        }

    @classmethod
    def from_columns(cls, cols: dict[str, Sequence]) -> "DecisionLog":
        n = len(cols["sweep"])
        return cls(
            Decision(
                int(cols["sweep"][i]), int(cols["beat"][i]), float(cols["t_upstroke_s"][i]),
                int(cols["accepted"][i]), str(cols["reason"][i]), str(cols["time_utc"][i]),
                str(cols["action"][i]),
            )
            for i in range(n)
        )

    def match(self, sweep: np.ndarray, t_upstroke_s: np.ndarray, *, tolerance_s: float) -> tuple[np.ndarray, np.ndarray]:
        """Which entry applies to each beat of a table, and which entries apply to none.

        Parameters
        ----------
        sweep, t_upstroke_s : ndarray, shape (n,)
            The table's beats.
        tolerance_s : float
            An entry applies to the beat of its sweep with the nearest upstroke, when that beat
            lies within this many seconds.

        Returns
        -------
        (ndarray of int, ndarray of bool)
            Per beat, the index of the latest applying entry (-1 for none); per entry, True when
            it applies to no beat (an orphan: its beat no longer exists).
        """
        sweep = np.asarray(sweep, dtype=np.int64)
        t = np.asarray(t_upstroke_s, dtype=np.float64)
        latest = np.full(sweep.size, -1, dtype=np.int64)
        orphan = np.ones(len(self._entries), dtype=bool)
        if not self._entries or sweep.size == 0:
            return latest, orphan
        cols = self.columns()
        for s in np.unique(cols["sweep"]):
            rows = np.flatnonzero(sweep == s)
            entries = np.flatnonzero(cols["sweep"] == s)
            if rows.size == 0:
                continue
            order = np.argsort(t[rows], kind="stable")
            ts = t[rows][order]
            te = cols["t_upstroke_s"][entries]
            pos = np.clip(np.searchsorted(ts, te), 1, max(ts.size - 1, 1))
            if ts.size == 1:
                nearest = np.zeros(te.size, dtype=np.int64)
            else:
                left, right = ts[pos - 1], ts[pos]
                nearest = np.where(np.abs(te - left) <= np.abs(right - te), pos - 1, pos)
            ok = np.abs(ts[nearest] - te) <= tolerance_s
            orphan[entries[ok]] = False
            # Entries are in log order, so a later one overwrites an earlier one on the same beat.
            target = rows[order[nearest[ok]]]
            for e, r in zip(entries[ok], target):
                latest[r] = e
        return latest, orphan

    def state(self, sweep: np.ndarray, t_upstroke_s: np.ndarray, *, tolerance_s: float) -> tuple[np.ndarray, np.ndarray]:
        """The review verdict of each beat: (accepted, reason).

        Returns
        -------
        (ndarray of int, ndarray of object)
            ``accepted`` is 1, 0, or -1 where no entry applies or the latest one cleared the
            verdict; ``reason`` is the applying entry's reason ("" where none).
        """
        latest, _ = self.match(sweep, t_upstroke_s, tolerance_s=tolerance_s)
        accepted = np.full(latest.size, CLEAR, dtype=np.int64)
        reason = np.full(latest.size, "", dtype=object)
        for i in np.flatnonzero(latest >= 0):
            d = self._entries[latest[i]]
            accepted[i] = d.accepted
            reason[i] = d.reason if d.accepted != CLEAR else ""
        return accepted, reason
