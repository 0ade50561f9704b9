"""The undoable edits of a :class:`~analysis.session.Session` (its command stack).

Each command does its edit, undoes it, and redoes it; the session keeps them on its undo and redo
stacks. Decisions are never removed from the log: undoing them appends entries that restore each
beat's earlier verdict (action ``undo``), redoing appends the verdicts again (action ``redo``).
"""

from __future__ import annotations

from dataclasses import replace

from analysis.decisions import CLEAR, REJECT, Decision, now_utc
from analysis.session._types import SessionCore, SettingsChange

__all__ = ["Command", "ConditionsCommand", "DecideCommand", "SettingsCommand", "SweepsCommand"]


class Command:
    """One undoable edit; ``keys`` names the recordings it touches."""

    text = ""
    keys: tuple[str, ...] = ()

    def do(self) -> None:
        raise NotImplementedError

    def undo(self) -> None:
        raise NotImplementedError

    def redo(self) -> None:
        self.do()


class DecideCommand(Command):
    """Appends review entries; undo appends entries that restore each beat's earlier verdict."""

    def __init__(self, session: SessionCore, key: str, rows: list[int], new: list[Decision], before, text: str) -> None:
        self.session, self.key, self.rows, self.new, self.before, self.text = session, key, rows, new, before, text
        self.keys = (key,)

    def _append(self, entries: list[Decision]) -> None:
        s = self.session
        s._entries[self.key].decisions.append(entries)
        s._invalidate(self.key)
        s._emit("decisions_changed", self.key, self.rows)

    def do(self) -> None:
        self._append(self.new)

    def undo(self) -> None:
        stamp = now_utc()
        restore = [
            replace(d, accepted=(acc if reviewed else CLEAR), reason=(why if reviewed and acc == REJECT else ""),
                    time_utc=stamp, action="undo")
            for d, (reviewed, acc, why) in zip(self.new, self.before)
        ]
        self._append(restore)

    def redo(self) -> None:
        stamp = now_utc()
        self._append([replace(d, time_utc=stamp, action="redo") for d in self.new])


class ConditionsCommand(Command):
    def __init__(self, session: SessionCore, key: str, old, new) -> None:
        self.session, self.key, self.old, self.new = session, key, old, new
        self.keys = (key,)
        self.text = "Change the conditions"

    def _set(self, value) -> None:
        s = self.session
        s._entries[self.key].conditions = value
        s._invalidate(self.key)
        s._emit("conditions_changed", self.key)

    def do(self) -> None:
        self._set(self.new)

    def undo(self) -> None:
        self._set(self.old)


class SettingsCommand(Command):
    def __init__(self, session: SessionCore, change: SettingsChange, keys: list[str]) -> None:
        self.session, self.change = session, change
        self.keys = tuple(keys)
        self.text = "Change the settings"
        self.old = {
            k: (e.settings, e.table, e.warnings, dict(e.info.provenance), e.detected)
            for k, e in ((k, session._entries[k]) for k in keys)
        }

    def _set(self, key: str, settings, table, warnings, provenance, reanalysed: bool, detected=None) -> None:
        s = self.session
        e = s._entries[key]
        e.settings, e.table, e.warnings = settings, table, warnings
        if detected is not None:
            e.detected = detected
        e.info.provenance = provenance
        s._invalidate(key)
        s._emit("settings_changed", key)
        if reanalysed:
            s._emit("results_changed", key)

    def do(self) -> None:
        c = self.change
        for k in self.keys:
            e = self.session._entries[k]
            prepared_from = e.version
            table = c.tables.get(k, e.table)
            dets = c.detections.get(k)
            if dets is None and e.detected is not None and e.detected[0] is e.table:
                dets = e.detected[1]  # the same detections: only later stages ran
            self._set(
                k, c.settings, table, c.warnings.get(k, e.warnings),
                c.provenance.get(k, dict(e.info.provenance)), k in c.tables,
                (table, dets) if dets is not None else None,
            )
            if k in c.summaries and c.versions.get(k) == prepared_from:
                # Computed with these very decisions and conditions: no need to summarise again.
                e.summaries = c.summaries[k]

    def undo(self) -> None:
        for k in self.keys:
            settings, table, warnings, prov, detected = self.old[k]
            self._set(k, settings, table, warnings, prov, k in self.change.tables, detected)


class SweepsCommand(Command):
    """Replaces a recording's sweep selection and its table (the merged re-analysis)."""

    def __init__(self, session: SessionCore, key: str, sweeps, table, warnings) -> None:
        self.session, self.key = session, key
        self.keys = (key,)
        self.text = "Change the sweeps analysed"
        e = session._entries[key]
        self.new = (sweeps, table, warnings)
        self.old = (e.info.sweeps, e.table, e.warnings)

    def _set(self, value) -> None:
        s = self.session
        e = s._entries[self.key]
        e.info.sweeps, e.table, e.warnings = value
        s._invalidate(self.key)
        s._emit("results_changed", self.key)

    def do(self) -> None:
        self._set(self.new)

    def undo(self) -> None:
        self._set(self.old)
