"""The undo stack and the change notifications of a :class:`~analysis.session.Session`.

:class:`SessionHistory` owns both: commands run through :meth:`SessionHistory._run` onto the undo
stack, and every change is announced to the callbacks given to :meth:`SessionHistory.subscribe`.
:class:`~analysis.session.Session` inherits it; it lives here so that each module stays small.
"""

from __future__ import annotations

from typing import Callable, Sequence

from analysis.session._commands import Command
from analysis.session._types import EVENTS, Change

__all__ = ["SessionHistory"]


class SessionHistory:
    """Undo, redo and change notifications for :class:`~analysis.session.Session` (a base class)."""

    def __init__(self) -> None:
        self._undo: list[Command] = []
        self._redo: list[Command] = []
        self._listeners: dict[str, list[Callable[[Change], None]]] = {}
        self._clean_depth: int | None = 0

    # -- notifications -----------------------------------------------------------------------
    def subscribe(self, event: str, callback: Callable[[Change], None]) -> Callable[[], None]:
        """Call ``callback(change)`` after every change of kind ``event`` (``"*"``: all).

        Returns
        -------
        callable
            Calling it unsubscribes.
        """
        if event != "*" and event not in EVENTS:
            raise ValueError(f"unknown session event {event!r}; choose from {', '.join(EVENTS)} or '*'")
        self._listeners.setdefault(event, []).append(callback)

        def unsubscribe() -> None:
            with_cb = self._listeners.get(event, [])
            if callback in with_cb:
                with_cb.remove(callback)

        return unsubscribe

    def _emit(self, event: str, recording: str | None = None, rows: Sequence[int] = (), detail: str = "") -> None:
        change = Change(event, recording, tuple(int(r) for r in rows), detail)
        for cb in list(self._listeners.get(event, ())) + list(self._listeners.get("*", ())):
            cb(change)

    # -- undo / redo -------------------------------------------------------------------------
    @property
    def can_undo(self) -> bool:
        return bool(self._undo)

    @property
    def can_redo(self) -> bool:
        return bool(self._redo)

    @property
    def undo_text(self) -> str:
        """What :meth:`undo` would undo ("" when nothing)."""
        return self._undo[-1].text if self._undo else ""

    @property
    def redo_text(self) -> str:
        return self._redo[-1].text if self._redo else ""

    @property
    def modified(self) -> bool:
        """True when the session differs from what was last saved or opened."""
        return self._clean_depth != len(self._undo)

    def undo(self) -> None:
        """Undo the latest edit (decisions are undone by log entries that restore the state)."""
        if not self._undo:
            return
        cmd = self._undo.pop()
        cmd.undo()
        self._redo.append(cmd)
        self._emit("history_changed")

    def redo(self) -> None:
        """Redo the latest undone edit."""
        if not self._redo:
            return
        cmd = self._redo.pop()
        cmd.redo()
        self._undo.append(cmd)
        self._emit("history_changed")

    def _run(self, cmd: Command) -> None:
        cmd.do()
        if self._clean_depth is not None and self._clean_depth > len(self._undo):
            self._clean_depth = None  # the saved state can no longer be reached by undo
        self._undo.append(cmd)
        self._redo.clear()
        self._emit("history_changed")

    def _touch(self) -> None:
        self._clean_depth = None
        self._emit("history_changed")

    def _drop_history(self, key: str) -> None:
        self._undo = [c for c in self._undo if key not in c.keys]
        self._redo = [c for c in self._redo if key not in c.keys]
