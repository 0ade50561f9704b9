"""Reviewing from the keyboard: moving beat to beat and sweep to sweep, verdicts, conditions.

Every verdict goes to the core's session (one undo step each, a region's beats in one step), and
the views redraw from the session's reviewed table when it says the decisions changed.
"""

from __future__ import annotations

import numpy as np
from PySide6 import QtCore, QtGui, QtWidgets

from analysis.conditions import Condition, ConditionError, SteadyState
from analysis.readouts import readout
from analysis.errors import InputError

from ..panels.conditions import ConditionDialog

__all__ = ["ReviewMixin"]


class ReviewMixin:
    """Beat and sweep navigation, accept/reject, cursors and conditions for the main window."""

    # -- the reviewed table ---------------------------------------------------------------------
    @property
    def beats(self):
        """The reviewed beat table of the channel shown (None before analysis, or when the
        channel shown is not the analysed one)."""
        if self.key is None or self.session.info(self.key).channel != self.channel:
            return None
        return self._beats

    def _sweep_rows(self, sweep: int | None = None) -> np.ndarray:
        b = self.beats
        if b is None or not len(b):
            return np.empty(0, dtype=np.int64)
        sweep = self.sweep if sweep is None else sweep
        rows = np.flatnonzero(np.asarray(b["sweep"]) == sweep)
        return rows[np.argsort(np.asarray(b["t_upstroke_s"])[rows], kind="stable")]

    def _time_order(self) -> np.ndarray:
        b = self.beats
        if b is None or not len(b):
            return np.empty(0, dtype=np.int64)
        return np.lexsort((np.asarray(b["t_upstroke_s"]), np.asarray(b["sweep"])))

    def ljp_mV(self) -> float:
        """The liquid-junction potential the current results subtract (0 before analysis).

        The session's own value (its recording's settings), so the trace, the markers, the
        readout and the summaries always agree.
        """
        if self.key is None:
            return 0.0
        return float(self.session.info(self.key).ljp_mV)

    # -- sweeps --------------------------------------------------------------------------------
    def set_sweep(self, sweep: int) -> None:
        """Show a sweep of the recording."""
        if self.recording is None:
            return
        sweep = int(np.clip(sweep, 0, self.recording.n_sweeps - 1))
        if sweep == self.sweep:
            return
        self.sweep = sweep
        ch = self.recording.channels[self.channel]
        offset = self.ljp_mV() if self.beats is not None else 0.0
        self.trace_view.set_sweep(self.levels(sweep), label=ch.name, units=ch.units, offset_mV=offset)
        self.trace_view.set_beats(self.beats)
        self.sweep_spin.blockSignals(True)
        self.sweep_spin.setValue(sweep + 1)
        self.sweep_spin.blockSignals(False)
        self._sync_overview_window()

    def next_sweep(self) -> None:
        self.set_sweep(self.sweep + 1)

    def previous_sweep(self) -> None:
        self.set_sweep(self.sweep - 1)

    def _sync_overview_window(self, *_args) -> None:
        if self.recording is None:
            return
        start = self.recording.sweep_starts_s[self.sweep]
        x0, x1 = self.trace_view.x_range()
        self.overview.set_window(start + max(0.0, x0), start + min(x1, self.levels(self.sweep).duration_s))

    def _on_overview_navigated(self, a: float, b: float) -> None:
        if self.recording is None:
            return
        sweep = self._sweep_at((a + b) / 2)
        if sweep != self.sweep:
            self.set_sweep(sweep)
        start = self.recording.sweep_starts_s[self.sweep]
        self.trace_view.show_span(a - start, b - start)

    def _on_overview_clicked(self, t: float) -> None:
        if self.recording is None:
            return
        self.set_sweep(self._sweep_at(t))
        start = self.recording.sweep_starts_s[self.sweep]
        x0, x1 = self.trace_view.x_range()
        half = (x1 - x0) / 2
        self.trace_view.show_span(t - start - half, t - start + half)

    def _sweep_at(self, t_s: float) -> int:
        starts = np.asarray(self.recording.sweep_starts_s)
        return int(np.clip(np.searchsorted(starts, t_s, side="right") - 1, 0, len(starts) - 1))

    # -- beats ---------------------------------------------------------------------------------
    def select_beat(self, row: int, *, follow: bool = True) -> None:
        """Make a beat (row of the reviewed table) the one under review, in every view."""
        b = self.beats
        if b is None or not (0 <= row < len(b)):
            return
        self.current_row = int(row)
        sweep = int(b["sweep"][row])
        if sweep != self.sweep:
            self.set_sweep(sweep)
        self.trace_view.set_current_beat(row, follow=follow)
        self.table.select_table_row(row)
        rows = self._sweep_rows()
        pos = int(np.flatnonzero(rows == row)[0]) if row in rows else 0
        self.beat_card.show_beat(b, row, len(rows), pos)
        self.figures.set_input(self._figure_input())

    def next_beat(self) -> None:
        self._step_beat(+1)

    def previous_beat(self) -> None:
        self._step_beat(-1)

    def _step_beat(self, step: int) -> None:
        order = self._time_order()
        if not order.size:
            return
        if self.current_row < 0:
            rows = self._sweep_rows()
            self.select_beat(int(rows[0] if rows.size else order[0]))
            return
        where = int(np.flatnonzero(order == self.current_row)[0])
        self.select_beat(int(order[int(np.clip(where + step, 0, order.size - 1))]))

    def accept_current(self) -> None:
        """Accept the beat under review and move on."""
        if self._can_edit() and self.current_row >= 0:
            row = self.current_row
            self.session.accept(self.key, [row])
            self._advance_from(row)

    def ask_reject_current(self) -> None:
        """Open the reason picker beside the beat under review."""
        if self._can_edit() and self.current_row >= 0:
            self._picker_target = ("beat", [self.current_row])
            self.reason_picker.open_at(self._beat_global_pos(self.current_row), "Reject this beat because…")

    def reject_current(self, reason: str) -> None:
        """Reject the beat under review with a reason and move on."""
        if self._can_edit() and self.current_row >= 0:
            row = self.current_row
            self.session.reject(self.key, [row], reason)
            self._advance_from(row)

    def clear_current(self) -> None:
        """Return the beat under review to the automatic verdict."""
        if self._can_edit() and self.current_row >= 0:
            self.session.clear_decisions(self.key, [self.current_row])

    def region_rows(self) -> np.ndarray:
        """Beats of the sweep shown whose upstroke lies between the cursors (or in view,
        when the cursors are hidden)."""
        rows = self._sweep_rows()
        if not rows.size:
            return rows
        t0, t1 = self.trace_view.cursor_times() if self.trace_view.cursors_visible() else self.trace_view.x_range()
        t = np.asarray(self._beats["t_upstroke_s"])[rows]
        return rows[(t >= t0) & (t <= t1)]

    def ask_reject_region(self) -> None:
        rows = self.region_rows()
        if self._can_edit() and rows.size:
            self._picker_target = ("region", rows.tolist())
            where = "between the cursors" if self.trace_view.cursors_visible() else "in view"
            pos = self.trace_view.mapToGlobal(self.trace_view.rect().center())
            self.reason_picker.open_at(pos, f"Reject the {rows.size} beats {where} because…")

    def reject_region(self, reason: str) -> int:
        """Reject every beat of :meth:`region_rows` with one reason (one undo step)."""
        rows = self.region_rows()
        if self._can_edit() and rows.size:
            self.session.reject(self.key, rows.tolist(), reason)
        return int(rows.size)

    def _on_reason_picked(self, reason: str) -> None:
        kind, rows = getattr(self, "_picker_target", ("beat", []))
        if kind == "region":
            if self._can_edit() and rows:
                self.session.reject(self.key, rows, reason)
        else:
            self.reject_current(reason)

    def _advance_from(self, row: int) -> None:
        if self.current_row == row:
            self.next_beat()

    def _beat_global_pos(self, row: int) -> QtCore.QPoint:
        t = float(self._beats["t_upstroke_s"][row])
        vb = self.trace_view.vb
        (_x0, _x1), (y0, y1) = vb.viewRange()
        scene = vb.mapViewToScene(QtCore.QPointF(t, y0 + 0.75 * (y1 - y0)))
        return self.trace_view.mapToGlobal(self.trace_view.mapFromScene(scene))

    def undo(self) -> None:
        if self._can_edit():
            self.session.undo()
            self._after_history_step()

    def redo(self) -> None:
        if self._can_edit():
            self.session.redo()
            self._after_history_step()

    def _after_history_step(self) -> None:
        # An undone settings change puts the old definitions back: show them in the form too.
        self.settings_form.show_settings(self.session.settings(self.key))
        self._refresh_all()

    def _can_edit(self) -> bool:
        if self.key is None or self.beats is None:
            return False
        if self._busy_reasons:
            self.status("wait until the analysis has finished")
            return False
        return True

    # -- cursors -------------------------------------------------------------------------------
    def set_cursors_visible(self, on: bool) -> None:
        if not on:
            self.trace_view.set_readout_text("")
        self.trace_view.set_cursors_visible(on)
        self.cursor_panel.set_cursors_shown(on)
        self.act_cursors.setChecked(on)

    def _on_cursors_finished(self, t0: float, t1: float) -> None:
        if self.recording is None:
            return
        rows = self._sweep_rows()
        ups = np.asarray(self.beats["t_upstroke_s"])[rows] if rows.size else None
        r = readout(self.recording, t0, t1, sweep=self.sweep, channel=self.channel, upstrokes_s=ups)
        offset = self.ljp_mV() if self.beats is not None else 0.0
        if offset:
            # The trace shown is corrected for the LJP; so are the readout's potentials.
            from dataclasses import replace

            r = replace(r, value0=r.value0 - offset, value1=r.value1 - offset, mean_value=r.mean_value - offset,
                        min_value=r.min_value - offset, max_value=r.max_value - offset)
        numbers = [int(self.beats["beat"][rows[i]]) for i in r.beats] if rows.size else []
        self.cursor_panel.show_readout(r, numbers)
        self.last_readout = r
        u = r.units
        self.trace_view.set_readout_text(
            f"C1–C2  Δt {r.delta_t_ms:.1f} ms · ΔV {r.delta_value:+.2f} {u} · mean {r.mean_value:.2f} {u} · "
            f"slope {r.slope_per_s:.1f} {u}/s · {r.n_beats} beat{'s' if r.n_beats != 1 else ''}"
            if r.n_samples else "C1–C2: no samples between the cursors")

    # -- conditions ----------------------------------------------------------------------------
    def mark_condition(self, t0_s: float, t1_s: float) -> None:
        """Name a span dragged on the overview (dialog) and add it as a condition."""
        if not self._can_edit():
            return
        self.overview.set_marking(False)
        self.conditions_panel.set_marking(False)
        taken = [c.name for c in self.session.conditions(self.key)]
        dialog = ConditionDialog(t0_s, t1_s, duration_s=self._recording_end_s(), taken=taken, parent=self)
        if self.interactive:
            if dialog.exec() != QtWidgets.QDialog.Accepted:
                return
        else:
            dialog.accept()  # no one to ask: the dialog's suggestions, as if OK were pressed
        if dialog.result_condition is not None:
            self.add_condition(dialog.result_condition)

    def add_condition(self, condition: Condition) -> bool:
        """Add a condition to the recording under review (one undo step)."""
        if not self._can_edit():
            return False
        try:
            self.session.add_condition(self.key, condition)
        except ConditionError as exc:
            self.show_error(exc.one_line())
            return False
        return True

    def edit_condition(self, index: int) -> None:
        conds = list(self.session.conditions(self.key)) if self.key else []
        if not (0 <= index < len(conds)) or not self.interactive:
            return
        c = conds[index]
        end = min(c.end, self._recording_end_s())
        dialog = ConditionDialog(c.start, end, duration_s=self._recording_end_s(),
                                 taken=[x.name for x in conds if x.name != c.name], condition=c, parent=self)
        if dialog.exec() == QtWidgets.QDialog.Accepted and dialog.result_condition:
            try:
                self.session.replace_condition(self.key, c.name, dialog.result_condition)
            except InputError as exc:
                self.show_error(exc.one_line())

    def remove_condition(self, index: int) -> None:
        conds = self.session.conditions(self.key) if self.key else ()
        if 0 <= index < len(conds) and self._can_edit():
            self.session.remove_condition(self.key, conds[index].name)

    def set_steady_state(self, name: str, steady: SteadyState) -> None:
        """Change a condition's steady-state window (one undo step)."""
        for c in self.session.conditions(self.key):
            if c.name == name:
                self.session.replace_condition(self.key, name, c.with_steady(steady))
                return
        raise KeyError(name)

    def _recording_end_s(self) -> float:
        rec = self.recording
        if rec is None:
            info = self.session.info(self.key)
            return info.sweep_starts_s[-1] + info.sweep_durations_s[-1]
        return rec.sweep_starts_s[-1] + rec.n_samples(rec.n_sweeps - 1) / rec.sampling_rate_hz

    # -- keyboard help ---------------------------------------------------------------------------
    def shortcut_table(self) -> list[tuple[str, str]]:
        """(keys, what) for every action that has a shortcut."""
        out = []
        for action in self.findChildren(QtGui.QAction):
            seq = action.shortcut().toString(QtGui.QKeySequence.NativeText)
            if seq:
                out.append((seq, action.text().replace("&", "").rstrip("…")))
        return sorted(set(out), key=lambda x: x[1])
