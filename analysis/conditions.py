"""Conditions: named stretches of a recording (baseline, drug, washout) and their steady state.

A condition is a time range (seconds from the start of the recording, so that it means the same
in gap-free and episodic files) or an inclusive range of sweeps. Each condition carries the
steady-state window its summary is computed over: the suggestion of :mod:`analysis.stats._summary`
(the default), the last T seconds, the last N beats, or the whole condition.

The text form, used by ``upstroke analyze --condition`` and shown in the app, is::

    NAME=START-END[,steady=RULE]

* ``START-END`` with a unit: seconds (``0s-60s``, or ``0-60s``: a unit after the end applies
  to a start without one), minutes (``1min-3min``), or open-ended to the end of the recording
  (``120s-end``, ``2min-``); or sweeps, inclusive, ``sweeps:0-3`` or ``sweeps:4``. A range
  without any unit (``0-60``, ``120-end``) is refused: a number's unit is never a guess.
* ``RULE`` is ``auto`` (the suggested steady state, the default), ``all`` (the whole condition),
  ``lastTs`` / ``lastTmin`` (``last30s``, ``last2min``) or ``lastNbeats`` (``last20beats``).

Names are free text without ``=`` or ``,``; they become the ``condition`` column of the beats
CSV.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field, replace
from typing import Sequence

import numpy as np

from analysis.errors import InputError

__all__ = [
    "Condition",
    "ConditionError",
    "SteadyState",
    "assign_conditions",
    "check_conditions",
    "check_inside",
    "parse_condition",
]

STEADY_KINDS = ("auto", "all", "last_s", "last_beats")
UNITS = ("s", "sweeps")


class ConditionError(InputError):
    """A condition is malformed, empty, or overlaps another one."""


@dataclass(frozen=True)
class SteadyState:
    """Which beats of a condition its summary uses.

    Attributes
    ----------
    kind : str
        ``"auto"``: the suggested steady-state window (rolling means of CL and APD90 stable
        within the tolerance of the summary settings); ``"all"``: every beat of the condition;
        ``"last_s"``: the last ``value`` seconds; ``"last_beats"``: the last ``value`` accepted
        beats.
    value : float
        Seconds or beats for the ``last_*`` kinds; 0 otherwise.
    """

    kind: str = "auto"
    value: float = 0.0

    def __post_init__(self) -> None:
        if self.kind not in STEADY_KINDS:
            raise ConditionError(None, f"unknown steady-state rule {self.kind!r}", f"use one of {', '.join(STEADY_KINDS)}")
        if self.kind in ("last_s", "last_beats") and not (math.isfinite(self.value) and self.value > 0):
            raise ConditionError(None, f"steady-state window {self.value!r} is not positive", "give a positive number of seconds or beats")
        if self.kind == "last_beats" and self.value != int(self.value):
            raise ConditionError(None, f"steady-state window of {self.value!r} beats", "give a whole number of beats")

    def text(self) -> str:
        """The rule as written on the command line (``auto``, ``last30s``, ``last20beats``)."""
        if self.kind == "last_s":
            return f"last{self.value:g}s"
        if self.kind == "last_beats":
            return f"last{int(self.value)}beats"
        return self.kind


@dataclass(frozen=True)
class Condition:
    """A named stretch of one recording.

    Attributes
    ----------
    name : str
        Shown in the ``condition`` column.
    start, end : float
        Seconds from the start of the recording (``end`` may be ``inf``: to the end), half-open
        ``[start, end)``; or, with ``unit="sweeps"``, the first and last sweep, inclusive.
    unit : str
        ``"s"`` or ``"sweeps"``.
    steady : SteadyState
        The window its summary is computed over.

    Examples
    --------
    >>> c = parse_condition("drug=60-180s,steady=last30s")
    >>> c.name, c.start, c.end, c.steady.text()
    ('drug', 60.0, 180.0, 'last30s')
    >>> c.text()
    'drug=60-180s,steady=last30s'
    """

    name: str
    start: float
    end: float
    unit: str = "s"
    steady: SteadyState = field(default_factory=SteadyState)

    def __post_init__(self) -> None:
        name = str(self.name).strip()
        if not name or "=" in name or "," in name or "\n" in name:
            raise ConditionError(None, f"condition name {self.name!r} is empty or holds '=', ',' or a line break", "choose a plain name such as baseline")
        object.__setattr__(self, "name", name)
        object.__setattr__(self, "start", float(self.start))
        object.__setattr__(self, "end", float(self.end))
        if self.unit not in UNITS:
            raise ConditionError(None, f"condition {name!r}: unknown unit {self.unit!r}", "use seconds or sweeps")
        if not math.isfinite(self.start) or self.start < 0 or math.isnan(self.end):
            raise ConditionError(None, f"condition {name!r} starts at {self.start!r}", "start at 0 or later")
        if self.unit == "s" and not self.end > self.start:
            raise ConditionError(None, f"condition {name!r} ends ({self.end:g} s) before it starts ({self.start:g} s)", "give START-END with END after START")
        if self.unit == "sweeps":
            if self.start != int(self.start) or (math.isfinite(self.end) and self.end != int(self.end)):
                raise ConditionError(None, f"condition {name!r}: sweeps must be whole numbers", "write sweeps:0-3")
            if self.end < self.start:
                raise ConditionError(None, f"condition {name!r}: last sweep {self.end:g} before first {self.start:g}", "write sweeps:FIRST-LAST")

    def with_steady(self, steady: SteadyState) -> "Condition":
        """The same condition with another steady-state window."""
        return replace(self, steady=steady)

    def span_s(self, sweep_starts_s: Sequence[float], sweep_durations_s: Sequence[float]) -> tuple[float, float]:
        """The condition as a time range from the start of the recording, in seconds."""
        if self.unit == "s":
            return self.start, self.end
        n = len(sweep_starts_s)
        first = min(int(self.start), n - 1) if n else 0
        last = n - 1 if not math.isfinite(self.end) else min(int(self.end), n - 1)
        if not n or int(self.start) >= n:
            return math.inf, math.inf
        return float(sweep_starts_s[first]), float(sweep_starts_s[last]) + float(sweep_durations_s[last])

    def text(self) -> str:
        """The condition in the command-line syntax (parses back to an equal condition)."""
        if self.unit == "sweeps":
            rng = f"sweeps:{int(self.start)}" + ("-end" if not math.isfinite(self.end) else ("" if self.end == self.start else f"-{int(self.end)}"))
        else:
            rng = f"{self.start:g}s-end" if not math.isfinite(self.end) else f"{self.start:g}-{self.end:g}s"
        steady = "" if self.steady.kind == "auto" else f",steady={self.steady.text()}"
        return f"{self.name}={rng}{steady}"


_NUM = r"(\d+(?:\.\d*)?|\.\d+)"
_TIME = re.compile(rf"^{_NUM}(s|min)?-(?:{_NUM}(s|min)?|end)?$")
_SWEEPS = re.compile(r"^sweeps?:(\d+)(?:-(\d+|end))?$")
_STEADY = re.compile(rf"^last{_NUM}(s|min|beats)$")


def _parse_steady(text: str, where: str) -> SteadyState:
    t = text.strip().lower()
    if t in ("auto", "all"):
        return SteadyState(t)
    m = _STEADY.match(t)
    if not m:
        raise ConditionError(None, f"{where}: steady-state rule {text!r} not understood", "write steady=auto, steady=all, steady=last30s or steady=last20beats")
    value, unit = float(m.group(1)), m.group(2)
    if unit == "beats":
        return SteadyState("last_beats", value)
    return SteadyState("last_s", value * (60.0 if unit == "min" else 1.0))


def parse_condition(text: str) -> Condition:
    """A condition from its command-line text, ``NAME=START-END[,steady=RULE]``.

    Raises
    ------
    ConditionError
        With the expected syntax in the message.

    Examples
    --------
    >>> parse_condition("washout=3min-end").end
    inf
    >>> parse_condition("baseline=0-60").start
    Traceback (most recent call last):
    ...
    analysis.conditions.ConditionError: condition 'baseline=0-60': the range '0-60' has no unit; write baseline=0s-60s (seconds) or baseline=0min-1min (minutes)
    >>> parse_condition("drug=sweeps:4-7,steady=last20beats").steady
    SteadyState(kind='last_beats', value=20.0)
    """
    raw = str(text).strip()
    fix = "write NAME=START-END with a unit (e.g. baseline=0s-60s or washout=3min-end), NAME=sweeps:FIRST-LAST, optionally ,steady=last30s"
    if "=" not in raw:
        raise ConditionError(None, f"condition {raw!r} has no '='", fix)
    name, _, rest = raw.partition("=")
    parts = [p.strip() for p in rest.split(",")]
    spec, options = parts[0].replace(" ", "").lower(), parts[1:]
    steady = SteadyState()
    for opt in options:
        key, sep, value = opt.partition("=")
        if key.strip().lower() != "steady" or not sep:
            raise ConditionError(None, f"condition {raw!r}: unknown option {opt!r}", fix)
        steady = _parse_steady(value, f"condition {raw!r}")
    m = _SWEEPS.match(spec)
    if m:
        first = int(m.group(1))
        last = math.inf if m.group(2) == "end" else float(m.group(2) if m.group(2) is not None else first)
        return Condition(name, first, last, "sweeps", steady)
    m = _TIME.match(spec)
    if not m:
        raise ConditionError(None, f"condition {raw!r}: range {parts[0]!r} not understood", fix)
    start_unit = m.group(2) or m.group(4)  # "0-60s": the end's unit applies to the start
    if start_unit is None or (m.group(3) is not None and m.group(4) is None):
        raise ConditionError(None, f"condition {raw!r}: the range {parts[0]!r} has no unit", _unit_fix(name, m))
    start = float(m.group(1)) * (60.0 if start_unit == "min" else 1.0)
    end = math.inf if m.group(3) is None else float(m.group(3)) * (60.0 if m.group(4) == "min" else 1.0)
    return Condition(name, start, end, "s", steady)


def _unit_fix(name: str, m: re.Match) -> str:
    """How to write a range that lacks its unit, with the user's own numbers."""
    a, b = m.group(1), m.group(3)
    if b is None:
        return f"write {name}={a}s-end (seconds) or {name}={a}min-end (minutes)"
    def minutes(x: str) -> str:
        return f"{float(x) / 60.0:g}"
    return f"write {name}={a}s-{b}s (seconds) or {name}={minutes(a)}min-{minutes(b)}min (minutes)"


def check_conditions(
    conditions: Sequence[Condition],
    sweep_starts_s: Sequence[float] | None = None,
    sweep_durations_s: Sequence[float] | None = None,
    *,
    where: str | None = None,
) -> tuple[Condition, ...]:
    """Conditions sorted by start, after checking names are unique and ranges do not overlap.

    When the sweeps' start times and durations are given, each condition must also lie inside
    the recording (:func:`check_inside`), and sweep ranges are compared with time ranges through
    them.

    Raises
    ------
    ConditionError
        For a condition outside the recording, a repeated name or an overlap, naming both
        conditions.
    """
    conds = list(conditions)
    if sweep_starts_s is not None and sweep_durations_s is not None:
        for c in conds:
            check_inside(c, sweep_starts_s, sweep_durations_s, where=where)
    names = [c.name for c in conds]
    for n in names:
        if names.count(n) > 1:
            raise ConditionError(where, f"two conditions are named {n!r}", "give each condition its own name")
    if sweep_starts_s is not None and sweep_durations_s is not None:
        spans = [c.span_s(sweep_starts_s, sweep_durations_s) for c in conds]
    else:
        spans = [(c.start, c.end if c.unit == "s" else c.end + 1) for c in conds]
        if len({c.unit for c in conds}) > 1:
            spans = [(0.0, 0.0)] * len(conds)  # cannot compare without the sweep geometry
    order = sorted(range(len(conds)), key=lambda i: (spans[i][0], spans[i][1], conds[i].name))
    for a, b in zip(order, order[1:]):
        if spans[b][0] < spans[a][1] and spans[a][1] > spans[a][0]:
            raise ConditionError(
                where, f"conditions {conds[a].name!r} and {conds[b].name!r} overlap",
                "make each condition end where the next begins",
            )
    return tuple(conds[i] for i in order)


#: Seconds a condition's end may pass the recording's end (rounding of the sweeps' durations).
END_TOLERANCE_S = 1e-3


def check_inside(
    condition: Condition,
    sweep_starts_s: Sequence[float],
    sweep_durations_s: Sequence[float],
    *,
    where: str | None = None,
) -> None:
    """Refuse a condition that starts or ends outside the recording.

    Parameters
    ----------
    condition : Condition
    sweep_starts_s, sweep_durations_s : sequence of float
        Per sweep of the recording: start from the start of the recording, and duration, in s.
    where : str or None
        The recording, for the message.

    Raises
    ------
    ConditionError
        Naming the condition, the recording's extent and how to write the condition instead.

    Examples
    --------
    >>> check_inside(parse_condition("washout=120s-end"), [0.0], [180.0])
    >>> check_inside(parse_condition("washout=120-300s"), [0.0], [180.0])
    Traceback (most recent call last):
    ...
    analysis.conditions.ConditionError: condition 'washout' ends at 300 s, after the recording ends (180 s); end it by 180 s, or write washout=120s-end to run to the end
    """
    c = condition
    n = len(sweep_starts_s)
    if c.unit == "sweeps":
        last = n - 1
        beyond = c.start if c.start > last else (c.end if math.isfinite(c.end) and c.end > last else None)
        if beyond is not None:
            raise ConditionError(
                where, f"condition {c.name!r} names sweep {int(beyond)}, but the recording has sweeps 0-{last}",
                f"give sweeps from 0 to {last}, e.g. {c.name}=sweeps:{min(int(c.start), last)}-end",
            )
        return
    ends = [float(a) + float(d) for a, d in zip(sweep_starts_s, sweep_durations_s)]
    rec_end = max(ends) if ends else 0.0
    if c.start >= rec_end:
        raise ConditionError(
            where, f"condition {c.name!r} starts at {c.start:g} s, when the recording has ended ({rec_end:g} s)",
            f"start it before {rec_end:g} s",
        )
    if math.isfinite(c.end) and c.end > rec_end + END_TOLERANCE_S:
        raise ConditionError(
            where, f"condition {c.name!r} ends at {c.end:g} s, after the recording ends ({rec_end:g} s)",
            f"end it by {rec_end:g} s, or write {c.name}={c.start:g}s-end to run to the end",
        )


def assign_conditions(
    sweep: np.ndarray,
    t_recording_s: np.ndarray,
    conditions: Sequence[Condition],
) -> np.ndarray:
    """The condition name of every beat (empty string for none).

    Parameters
    ----------
    sweep : ndarray of int, shape (n,)
        Each beat's sweep.
    t_recording_s : ndarray of float, shape (n,)
        Each beat's upstroke time from the start of the recording.
    conditions : sequence of Condition
        Non-overlapping (see :func:`check_conditions`); when ranges do overlap, the later
        condition in the sequence wins.

    Returns
    -------
    ndarray of object (str), shape (n,)
    """
    names = np.full(len(sweep), "", dtype=object)
    sweep = np.asarray(sweep)
    t = np.asarray(t_recording_s, dtype=np.float64)
    for c in conditions:
        if c.unit == "s":
            inside = (t >= c.start) & (t < c.end)
        else:
            inside = (sweep >= c.start) & (sweep <= c.end)
        names[inside] = c.name
    return names
