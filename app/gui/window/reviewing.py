"""Reviewing from the keyboard: moving beat to beat, verdicts, cursors, conditions.

Every verdict goes to the core's session (one undo step each, a region's beats in one step), and
the views redraw from the session's reviewed table when it says the decisions changed.
"""

from __future__ import annotations

import numpy as np
from PySide6 import QtCore, QtWidgets

from analysis.conditions import Condition, ConditionError, SteadyState
from analysis.decisions import TO_REVIEW
from analysis.errors import InputError
from analysis.readouts import readout

from .. import palette
from ..panels.conditions import ConditionDialog
from ..views.beat_marks import beat_extent
from .display import Display
from .feedback import Feedback
from .state import WindowState, WindowViews

__all__ = ["Reviewer", "waiting_mask"]


def waiting_mask(table) -> np.ndarray | None:
    """Beats that need a look: waiting for review, or flagged (a flag the review should see)
    and not yet given a verdict by the user."""
    if table is None:
        return None
    n = len(table)
    waiting = (np.asarray(table["verdict"], dtype=object) == TO_REVIEW) if "verdict" in table else np.zeros(n, bool)
    flags = np.asarray(table["flags"], dtype=object) if "flags" in table else np.full(n, "", dtype=object)
    flagged = np.array([any(w and w not in palette.QUIET_FLAGS for w in str(f).split(";")) for f in flags], dtype=bool)
    unreviewed = np.asarray(table["reviewed"]) == 0 if "reviewed" in table else np.ones(n, bool)
    return waiting | (flagged & unreviewed)


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

    def next_waiting(self) -> None:
        """The next beat that needs a look: waiting for review, or flagged and not yet reviewed."""
        self._step_to(+1, waiting_mask(self.state.table))

    def previous_waiting(self) -> None:
        """The previous beat that needs a look (see :meth:`next_waiting`)."""
        self._step_to(-1, waiting_mask(self.state.table))

    def next_unreviewed(self) -> None:
        """The next beat with no verdict of the user's."""
        t = self.state.table
        self._step_to(+1, None if t is None else np.asarray(t["reviewed"]) == 0 if "reviewed" in t else np.ones(len(t), bool))

    def _step_to(self, step: int, wanted: np.ndarray | None) -> None:
        """The nearest beat after (``step`` +1) or before (-1) the one under review, in time
        order across sweeps, where ``wanted`` is True; says so when there is none."""
        order = self.state.time_order()
        if wanted is None or not order.size:
            return
        here = np.flatnonzero(order == self.state.current_row)
        where = int(here[0]) if here.size else -1
        ahead = order[where + 1:] if step > 0 else order[:max(where, 0)][::-1]
        hits = ahead[wanted[ahead]]
        if hits.size:
            self.display.select_beat(int(hits[0]))
        else:
            left = int(wanted.sum())
            self.feedback.status(f"no such beat {'after' if step > 0 else 'before'} this one ({left} in all)")

    def accept_current(self) -> None:
        """Accept the beat under review and move on."""
        if self._can_edit() and self.state.current_row >= 0:
            row = self.state.current_row
            self._decide_and_move_on(row, lambda: self.state.session.accept(self.state.key, [row]))

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
            self._decide_and_move_on(row, lambda: self.state.session.reject(self.state.key, [row], reason))

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
            where = "between the gates" if self.views.trace_view.cursors_visible() else "in view"
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

    def _decide_and_move_on(self, row: int, decide) -> None:
        """Give a verdict on the beat under review, then show the next beat: the beat card is
        filled once, for the next beat (the one judged is left behind)."""
        self.display.moving_on = True
        try:
            decide()
        finally:
            self.display.moving_on = False
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
            f"gated {r.delta_t_ms:.1f} ms │ rise {r.delta_value:+.2f} {u} │ average {r.mean_value:.2f} {u} │ "
            f"trend {r.slope_per_s:+.1f} {u}/s │ {r.n_beats} upstroke{'s' if r.n_beats != 1 else ''} inside"
            if r.n_samples else "gates: no sample between them")

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
