"""Sweep selections such as ``0-3,5``: parsed into ranges, checked against a recording, then listed.

A selection is kept as a few inclusive ranges, never as the list of its sweeps, so ``0-999999999999``
takes a few bytes: it is compared with the recording's sweep count before anything is listed, and
only a selection that fits the recording (at most that many sweeps) is ever expanded.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from dataclasses import dataclass

from analysis.errors import InputError

__all__ = ["SweepSelection", "SweepSelectionError"]


class SweepSelectionError(InputError):
    """A sweep selection that is not a list of sweeps, or that names sweeps a recording lacks."""


@dataclass(frozen=True)
class SweepSelection:
    """Sweeps as sorted, non-overlapping inclusive ranges ``((first, last), ...)``.

    Examples
    --------
    >>> sel = SweepSelection.parse("5,0-3,2")
    >>> sel.ranges, sel.text()
    (((0, 3), (5, 5)), '0-3,5')
    >>> sel.resolve(8, "cell.abf")
    (0, 1, 2, 3, 5)
    >>> SweepSelection.parse("0-999999999999").count
    1000000000000
    """

    ranges: tuple[tuple[int, int], ...]

    @classmethod
    def parse(cls, text: str) -> SweepSelection:
        """``"0-3,5"`` -> the ranges ``((0, 3), (5, 5))``.

        Raises
        ------
        ValueError
            For text that is not comma-separated sweep numbers and ``FIRST-LAST`` ranges (with
            FIRST <= LAST, no negative number), or that names no sweep.
        """
        parts: list[tuple[int, int]] = []
        for part in str(text).split(","):
            part = part.strip()
            if not part:
                continue
            first, dash, last = part.partition("-")
            a = _number(first)
            b = _number(last) if dash else a
            if b < a:
                raise ValueError(f"the range {part} runs backwards")
            parts.append((a, b))
        if not parts:
            raise ValueError("it names no sweep")
        merged: list[list[int]] = []
        for a, b in sorted(parts):
            if merged and a <= merged[-1][1] + 1:
                merged[-1][1] = max(merged[-1][1], b)
            else:
                merged.append([a, b])
        return cls(tuple((a, b) for a, b in merged))

    @property
    def count(self) -> int:
        """How many sweeps the selection names."""
        return sum(b - a + 1 for a, b in self.ranges)

    @property
    def last(self) -> int:
        """The highest sweep named (-1 for an empty selection)."""
        return self.ranges[-1][1] if self.ranges else -1

    def __iter__(self) -> Iterator[int]:
        for a, b in self.ranges:
            yield from range(a, b + 1)

    def __contains__(self, sweep: object) -> bool:
        return isinstance(sweep, int) and any(a <= sweep <= b for a, b in self.ranges)

    def text(self) -> str:
        """The selection as it is written: ``0-3,5``."""
        return ",".join(str(a) if a == b else f"{a}-{b}" for a, b in self.ranges)

    def resolve(self, n_sweeps: int, path: str | os.PathLike | None) -> tuple[int, ...]:
        """The sweeps named, after checking that a recording of ``n_sweeps`` sweeps has them all.

        Raises
        ------
        SweepSelectionError
            Naming ``path``, when a sweep is ``n_sweeps`` or beyond (checked on the ranges'
            ends, before any list is made).
        """
        if self.last >= n_sweeps:
            beyond = next(max(a, n_sweeps) for a, b in self.ranges if b >= n_sweeps)
            raise SweepSelectionError(
                path, f"has {n_sweeps} sweep{'s' * (n_sweeps != 1)} (0 to {n_sweeps - 1}) but --sweeps "
                f"{_short(self.text())} asks for sweep {beyond}",
                f"choose sweeps from 0 to {n_sweeps - 1}",
            )
        return tuple(self)


def _number(text: str) -> int:
    text = text.strip()
    if not text.isdigit():  # no sign, no spaces inside, no fractions: a plain sweep number
        raise ValueError(f"{text!r} is not a sweep number" if text else "a range lacks a number")
    return int(text)


def _short(text: str, limit: int = 60) -> str:
    return text if len(text) <= limit else text[: limit - 3] + "..."
