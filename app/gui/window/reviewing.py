"""Reviewing from the keyboard: moving beat to beat, verdicts, cursors, conditions.

Every verdict goes to the core's session (one undo step each, a region's beats in one step), and
the views redraw from the session's reviewed table when it says the decisions changed.
"""

from __future__ import annotations

import numpy as np
from PySide6 import QtCore, QtWidgets

from analysis.conditions import Condition, ConditionError, SteadyState
from analysis.errors import InputError
from analysis.readouts import readout

from ..panels.conditions import ConditionDialog
from ..views.beat_marks import beat_extent
from .display import Display
from .feedback import Feedback
from .state import WindowState, WindowViews

__all__ = ["Reviewer"]


class Reviewer:
    """Beat navigation, accept/reject, the cursors' readout and conditions.

    Parameters
    ----------
    state : WindowState
    views : WindowViews
    display : Display
        Selects beats and redraws after a step back or forward in the history.
    feedback : Feedback
    parent : QWidget
        Over which the condition dialog opens (the window).
    """

    def __init__(self, state: WindowState, views: WindowViews, display: Display, feedback: Feedback,
                 parent: QtWidgets.QWidget) -> None:
        self.state = state
        self.views = views
        self.display = display
        self.feedback = feedback
        self.parent = parent
        self._picker_target: tuple[str, list] = ("beat", [])

    # -- beats ---------------------------------------------------------------------------------
    def next_beat(self) -> None:
        self._step_beat(+1)

    def previous_beat(self) -> None:
        self._step_beat(-1)

    def _step_beat(self, step: int) -> None:
        order = self.state.time_order()
        if not order.size:
            return
        if self.state.current_row < 0:
            rows = self.state.sweep_rows()
            self.display.select_beat(int(rows[0] if rows.size else order[0]))
            return
        where = int(np.flatnonzero(order == self.state.current_row)[0])
        self.display.select_beat(int(order[int(np.clip(where + step, 0, order.size - 1))]))

    def accept_current(self) -> None:
        """Accept the beat under review and move on."""
        if self._can_edit() and self.state.current_row >= 0:
            row = self.state.current_row
            self.state.session.accept(self.state.key, [row])
            self._advance_from(row)

    def ask_reject_current(self) -> None:
        """Open the reason picker beside the beat under review."""
        if self._can_edit() and self.state.current_row >= 0:
            self._picker_target = ("beat", [self.state.current_row])
            avoid = self._beat_global_rect(self.state.current_row)
            self.views.reason_picker.open_at(avoid.topRight(), "Reject this beat because…", avoid=avoid)

    def reject_current(self, reason: str) -> None:
        """Reject the beat under review with a reason and move on."""
        if self._can_edit() and self.state.current_row >= 0:
            row = self.state.current_row
            self.state.session.reject(self.state.key, [row], reason)
            self._advance_from(row)

    def clear_current(self) -> None:
        """Return the beat under review to the automatic verdict."""
        if self._can_edit() and self.state.current_row >= 0:
            self.state.session.clear_decisions(self.state.key, [self.state.current_row])

    def region_rows(self) -> np.ndarray:
        """Beats of the sweep shown whose upstroke lies between the cursors (or in view,
        when the cursors are hidden)."""
        rows = self.state.sweep_rows()
        if not rows.size:
            return rows
        t0, t1 = self.views.trace_view.cursor_times() if self.views.trace_view.cursors_visible() else self.views.trace_view.x_range()
        t = np.asarray(self.state.table["t_upstroke_s"])[rows]
        return rows[(t >= t0) & (t <= t1)]

    def ask_reject_region(self) -> None:
        rows = self.region_rows()
        if self._can_edit() and rows.size:
            self._picker_target = ("region", rows.tolist())
            where = "between the cursors" if self.views.trace_view.cursors_visible() else "in view"
            pos = self.views.trace_view.mapToGlobal(self.views.trace_view.rect().center())
            self.views.reason_picker.open_at(pos, f"Reject the {rows.size} beats {where} because…")

    def reject_region(self, reason: str) -> int:
        """Reject every beat of :meth:`region_rows` with one reason (one undo step)."""
        rows = self.region_rows()
        if self._can_edit() and rows.size:
            self.state.session.reject(self.state.key, rows.tolist(), reason)
        return int(rows.size)

    def on_reason_picked(self, reason: str) -> None:
        kind, rows = self._picker_target
        if kind == "region":
            if self._can_edit() and rows:
                self.state.session.reject(self.state.key, rows, reason)
        else:
            self.reject_current(reason)

    def _advance_from(self, row: int) -> None:
        if self.state.current_row == row:
            self.next_beat()

    def _beat_global_rect(self, row: int) -> QtCore.QRect:
        """The beat on screen, from its MDP to its APD90 marker, the plot's whole height."""
        view = self.views.trace_view
        a, e = beat_extent(self.state.table, np.array([row]))
        vb = view.vb
        (_x0, _x1), (y0, y1) = vb.viewRange()
        corners = [view.mapToGlobal(view.mapFromScene(vb.mapViewToScene(QtCore.QPointF(float(x), float(y)))))
                   for x, y in ((a[0], y1), (e[0], y0))]
        return QtCore.QRect(corners[0], corners[1]).normalized()

    def undo(self) -> None:
        if self._can_edit():
            self.state.session.undo()
            self._after_history_step()

    def redo(self) -> None:
        if self._can_edit():
            self.state.session.redo()
            self._after_history_step()

    def _after_history_step(self) -> None:
        # A verdict or a condition undone has redrawn what it changed through the session's own
        # notice. An undone settings change puts the old definitions back: the form shows them,
        # and everything is drawn again.
        settings = self.state.session.settings(self.state.key)
        if settings != self.views.settings_form.settings:
            self.views.settings_form.show_settings(settings)
            self.display.refresh_all()

    def _can_edit(self) -> bool:
        if self.state.key is None or self.state.beats is None:
            return False
        if self.feedback.busy_reasons:
            self.feedback.status("wait until the analysis has finished")
            return False
        return True

    # -- cursors -------------------------------------------------------------------------------
    def on_cursors_finished(self, t0: float, t1: float) -> None:
        if self.state.recording is None:
            return
        rows = self.state.sweep_rows()
        ups = np.asarray(self.state.beats["t_upstroke_s"])[rows] if rows.size else None
        r = readout(self.state.recording, t0, t1, sweep=self.state.sweep, channel=self.state.channel, upstrokes_s=ups)
        offset = self.state.ljp_mV() if self.state.beats is not None else 0.0
        if offset:
            # The trace shown is corrected for the LJP; so are the readout's potentials.
            from dataclasses import replace

            r = replace(r, value0=r.value0 - offset, value1=r.value1 - offset, mean_value=r.mean_value - offset,
                        min_value=r.min_value - offset, max_value=r.max_value - offset)
        numbers = [int(self.state.beats["beat"][rows[i]]) for i in r.beats] if rows.size else []
        self.views.cursor_panel.show_readout(r, numbers)
        self.state.last_readout = r
        u = r.units
        self.views.trace_view.set_readout_text(
            f"C1–C2  Δt {r.delta_t_ms:.1f} ms · ΔV {r.delta_value:+.2f} {u} · mean {r.mean_value:.2f} {u} · "
            f"slope {r.slope_per_s:.1f} {u}/s · {r.n_beats} beat{'s' if r.n_beats != 1 else ''}"
            if r.n_samples else "C1–C2: no samples between the cursors")

    # -- conditions ----------------------------------------------------------------------------
    def mark_condition(self, t0_s: float, t1_s: float) -> None:
        """Name a span dragged on the overview (dialog) and add it as a condition."""
        if not self._can_edit():
            return
        self.views.overview.set_marking(False)
        self.views.conditions_panel.set_marking(False)
        taken = [c.name for c in self.state.session.conditions(self.state.key)]
        dialog = ConditionDialog(t0_s, t1_s, duration_s=self.state.recording_end_s(), taken=taken, parent=self.parent)
        if self.feedback.interactive:
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
            self.state.session.add_condition(self.state.key, condition)
        except ConditionError as exc:
            self.feedback.show_error(exc.one_line())
            return False
        return True

    def edit_condition(self, index: int) -> None:
        conds = list(self.state.session.conditions(self.state.key)) if self.state.key else []
        if not (0 <= index < len(conds)) or not self.feedback.interactive:
            return
        c = conds[index]
        end = min(c.end, self.state.recording_end_s())
        dialog = ConditionDialog(c.start, end, duration_s=self.state.recording_end_s(),
                                 taken=[x.name for x in conds if x.name != c.name], condition=c, parent=self.parent)
        if dialog.exec() == QtWidgets.QDialog.Accepted and dialog.result_condition:
            try:
                self.state.session.replace_condition(self.state.key, c.name, dialog.result_condition)
            except InputError as exc:
                self.feedback.show_error(exc.one_line())

    def remove_condition(self, index: int) -> None:
        conds = self.state.session.conditions(self.state.key) if self.state.key else ()
        if 0 <= index < len(conds) and self._can_edit():
            self.state.session.remove_condition(self.state.key, conds[index].name)

    def set_steady_state(self, name: str, steady: SteadyState) -> None:
        """Change a condition's steady-state window (one undo step)."""
        for c in self.state.session.conditions(self.state.key):
            if c.name == name:
                self.state.session.replace_condition(self.state.key, name, c.with_steady(steady))
                return
        raise KeyError(name)
