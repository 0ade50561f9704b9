"""Review decisions: an append-only log of accept/reject verdicts on beats, and each beat's status.

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

Status of a beat
----------------
Every front end (the command line, the app, the results file, the summaries) says where a beat
stands with :func:`beat_status`, one function:

``accepted``
    used by the summaries: no quality rule rejected it and no flag holds it for review, or the
    user accepted it;
``rejected``
    a quality rule rejected it (its reason starts ``auto:``) or the user did;
``to_review``
    it carries a flag of the ``quality.review_flags`` setting (by default the artefact-type
    flags: ``clipped``, ``noisy``, ``mdp_drift``, ``low_apa``, ``artefact``: "this value may be
    wrong") and nobody has judged it yet. It stays out of every summary until the user accepts
    or rejects it, and is counted apart.

Who decided (``decided_by``) is :data:`AUTO` for the rules (including holding a beat for
review) and :data:`USER` where a review decision applies.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from datetime import datetime, timezone
from typing import Iterable, Sequence

import numpy as np

from analysis.errors import InputError

__all__ = [
    "ACCEPT",
    "ACCEPTED",
    "AUTO",
    "CLEAR",
    "MATCH_TOLERANCE_S",
    "REJECT",
    "REJECTED",
    "STATUSES",
    "TO_REVIEW",
    "USER",
    "BeatStatus",
    "Decision",
    "DecisionLog",
    "apply_status",
    "beat_status",
    "held_for_review",
    "now_utc",
    "update_status",
    "REPRODUCIBLE_CLOCK_ENV",
]

ACCEPT, REJECT, CLEAR = 1, 0, -1
#: A beat's status, as the beats CSV's ``verdict`` column writes it.
ACCEPTED, REJECTED, TO_REVIEW = "accepted", "rejected", "to_review"
STATUSES = (ACCEPTED, REJECTED, TO_REVIEW)
#: Who decided, as the beats CSV's ``decided_by`` column writes it.
AUTO, USER = "auto", "user"
#: A decision applies to the beat of its sweep whose upstroke lies this near (seconds).
MATCH_TOLERANCE_S = 0.010
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


@dataclass(frozen=True)
class BeatStatus:
    """Where each beat of a table stands; equal-length arrays, one entry per beat.

    Attributes
    ----------
    status : ndarray of object (str)
        :data:`ACCEPTED`, :data:`REJECTED` or :data:`TO_REVIEW`.
    reason : ndarray of object (str)
        Why a beat is rejected (the rule's ``auto: ...`` text or the user's words); empty
        otherwise.
    decided_by : ndarray of object (str)
        :data:`AUTO` or :data:`USER`.
    """

    status: np.ndarray
    reason: np.ndarray
    decided_by: np.ndarray

    @property
    def used(self) -> np.ndarray:
        """True where the beat is accepted (the ``accepted`` column: 1 used, 0 not)."""
        return self.status == ACCEPTED

    def counts(self) -> dict[str, int]:
        """How many beats have each status, ``{"accepted": .., "rejected": .., "to_review": ..}``."""
        return {s: int(np.count_nonzero(self.status == s)) for s in STATUSES}


def held_for_review(flags: Sequence[str], review_flags: Iterable[str]) -> np.ndarray:
    """True for each ``;``-separated flags text that holds one of ``review_flags``.

    Examples
    --------
    >>> held_for_review(["noisy;pause", "ead", ""], ("noisy", "clipped")).tolist()
    [True, False, False]
    """
    wanted = frozenset(review_flags)
    if not wanted:
        return np.zeros(len(flags), dtype=bool)
    return np.fromiter((bool(wanted.intersection(str(f).split(";"))) for f in flags), dtype=bool, count=len(flags))


def beat_status(
    table,
    decisions: DecisionLog | None = None,
    review_flags: Iterable[str] = (),
    *,
    tolerance_s: float = MATCH_TOLERANCE_S,
) -> BeatStatus:
    """The status of every beat: the quality rules' verdict, review flags, then the user's decisions.

    Parameters
    ----------
    table : BeatTable or mapping of str to array
        The automatic beat table (as analysis gave it, no review applied): ``sweep``,
        ``t_upstroke_s``, ``flags`` and ``accepted``, and ``reject_reason`` where the quality
        rules wrote their reasons. With ``reject_reason`` present a beat is rejected by a rule
        exactly when it has a reason (the rules always give one, so a table this function has
        already been applied to gives the same answer again); without it, where ``accepted`` is 0.
    decisions : DecisionLog or None
        The review decisions (None: none); the latest one that applies to a beat wins, and a
        cleared decision leaves the automatic status.
    review_flags : iterable of str
        Flags that hold a beat for review (the ``quality.review_flags`` setting).
    tolerance_s : float
        How near a decision's upstroke time must lie to a beat's (:meth:`DecisionLog.match`).

    Returns
    -------
    BeatStatus

    Examples
    --------
    >>> t = {"sweep": [0, 0, 0, 0], "t_upstroke_s": [0.5, 1.0, 1.5, 2.0], "accepted": [1, 0, 1, 1],
    ...      "flags": ["", "clipped", "noisy", "ead"], "reject_reason": ["", "auto: clipped", "", ""]}
    >>> beat_status(t, None, ("clipped", "noisy")).status.tolist()
    ['accepted', 'rejected', 'to_review', 'accepted']
    >>> log = DecisionLog([Decision(0, 2, 1.5, ACCEPT, "", "2024-01-01T00:00:00.000Z")])
    >>> st = beat_status(t, log, ("clipped", "noisy"))
    >>> st.status[2], st.decided_by[2]
    ('accepted', 'user')
    """
    n = len(table["flags"])
    if "reject_reason" in table:
        reason = np.array(["" if r is None else str(r) for r in table["reject_reason"]], dtype=object)
        rule_rejected = reason != ""
    else:
        reason = np.full(n, "", dtype=object)
        rule_rejected = np.asarray(table["accepted"]) == 0
    held = held_for_review(table["flags"], review_flags) & ~rule_rejected
    status = np.full(n, ACCEPTED, dtype=object)
    status[rule_rejected] = REJECTED
    status[held] = TO_REVIEW
    reason[~rule_rejected] = ""
    decided_by = np.full(n, AUTO, dtype=object)
    if decisions is not None and len(decisions) and n:
        verdict, why = decisions.state(table["sweep"], table["t_upstroke_s"], tolerance_s=tolerance_s)
        decided = verdict != CLEAR
        status[decided & (verdict == ACCEPT)] = ACCEPTED
        status[decided & (verdict == REJECT)] = REJECTED
        reason[decided] = np.where(verdict[decided] == REJECT, why[decided], "")
        decided_by[decided] = USER
    return BeatStatus(status, reason, decided_by)


def apply_status(table, decisions: DecisionLog | None = None, review_flags: Iterable[str] = (), *,
                 tolerance_s: float = MATCH_TOLERANCE_S):
    """The table with its status written into it: ``accepted``, ``reject_reason``, ``verdict``,
    ``decided_by`` and ``reviewed`` (1 where a review decision applies).

    ``table`` is a BeatTable (anything with ``with_columns``); see :func:`beat_status`.
    """
    st = beat_status(table, decisions, review_flags, tolerance_s=tolerance_s)
    return table.with_columns(
        accepted=st.used.astype(np.int64), reject_reason=st.reason, verdict=st.status,
        decided_by=st.decided_by, reviewed=(st.decided_by == USER).astype(np.int64),
    )


def update_status(view, table, entries: Sequence[Decision], review_flags: Iterable[str] = (), *,
                  tolerance_s: float = MATCH_TOLERANCE_S):
    """``view`` after ``entries`` were appended to the log it was made with: only the beats those
    entries apply to are worked out again (a review key's verdict changes one row).

    Parameters
    ----------
    view : BeatTable
        ``apply_status(table, log, review_flags)`` (more columns may follow).
    table : BeatTable
        The automatic table ``view`` was made from.
    entries : sequence of Decision
        The entries appended to ``log`` since; being the latest, each wins on the beat it
        applies to.

    Returns
    -------
    BeatTable
        Equal to ``apply_status(table, log + entries, review_flags)`` in the status columns, the
        other columns of ``view`` as they are.
    """
    new = DecisionLog(entries)
    latest, _ = new.match(table["sweep"], table["t_upstroke_s"], tolerance_s=tolerance_s)
    rows = np.flatnonzero(latest >= 0)
    if not rows.size:
        return view
    # A beat's nearest entry among all beats is also its nearest among the beats the entries
    # apply to, so matching the entries again on those rows alone gives the same verdicts.
    st = beat_status(table.take(rows), new, review_flags, tolerance_s=tolerance_s)
    changed = {"accepted": st.used.astype(np.int64), "reject_reason": st.reason, "verdict": st.status,
               "decided_by": st.decided_by, "reviewed": (st.decided_by == USER).astype(np.int64)}
    return view.with_rows_set(rows, **changed)
