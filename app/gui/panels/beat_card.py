"""Reviewing beats: the reason picker and the card describing the beat under review.

A rejection always carries a reason. The picker pops up beside the beat with the common reasons
numbered 1-9 (press the digit) and "other…" for free text; it remembers the last reason first.
"""

from __future__ import annotations

import math

from PySide6 import QtCore, QtGui, QtWidgets

from analysis.columns import column
from analysis.table import BeatTable

from .. import palette

__all__ = ["REASONS", "ReasonPicker", "BeatCard"]

#: Reasons offered for a rejection, in the picker's order.
REASONS = (
    "electrical artefact",
    "seal or access trouble",
    "noise",
    "abnormal shape",
    "early after-depolarisation",
    "follows a pause",
    "baseline drift",
    "outside the steady state",
)


class ReasonPicker(QtWidgets.QMenu):
    """A non-blocking menu of reasons. ``picked(str)`` gives the reason chosen."""

    picked = QtCore.Signal(str)

    def __init__(self, parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("reason_picker")
        self.last_reason: str | None = None
        self.triggered.connect(self._on_triggered)

    def open_at(self, global_pos: QtCore.QPoint, title: str = "Reject because…") -> None:
        """Show the picker (returns at once; ``picked`` fires when the user chooses)."""
        self.clear()
        head = self.addAction(title)
        head.setEnabled(False)
        reasons = list(REASONS)
        if self.last_reason and self.last_reason not in reasons:
            reasons.insert(0, self.last_reason)
        elif self.last_reason:
            reasons.remove(self.last_reason)
            reasons.insert(0, self.last_reason)
        for i, reason in enumerate(reasons[:9], start=1):
            action = self.addAction(f"&{i}  {reason}")
            action.setData(reason)
        self.addSeparator()
        other = self.addAction("&0  other…")
        other.setData("")
        self.popup(global_pos)

    def reason_actions(self) -> list[QtGui.QAction]:
        return [a for a in self.actions() if a.data() is not None and a.isEnabled()]

    def _on_triggered(self, action: QtGui.QAction) -> None:
        reason = action.data()
        if reason is None:
            return
        self.close()
        if reason == "":
            text, ok = QtWidgets.QInputDialog.getText(self.parentWidget(), "Reject", "Reason for rejecting:")
            reason = text.strip() if ok else ""
            if not reason:
                return
        self.last_reason = reason
        window = self.parentWidget().window() if self.parentWidget() is not None else None
        if window is not None:
            window.activateWindow()  # the keys go back to the window's shortcuts
        self.picked.emit(reason)


class BeatCard(QtWidgets.QFrame):
    """The beat under review: where it is, its verdict and its main values."""

    accept_clicked = QtCore.Signal()
    reject_clicked = QtCore.Signal()

    def __init__(self, parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("beat_card")
        self.setFrameShape(QtWidgets.QFrame.StyledPanel)
        layout = QtWidgets.QVBoxLayout(self)
        layout.setContentsMargins(8, 6, 8, 6)
        self.title = QtWidgets.QLabel("no beat selected")
        self.title.setObjectName("beat_card_title")
        self.title.setStyleSheet("font-size: 12pt; font-weight: bold;")
        self.verdict = QtWidgets.QLabel("")
        self.verdict.setWordWrap(True)
        self.values = QtWidgets.QLabel("")
        self.values.setStyleSheet("font-family: monospace;")
        self.values.setTextInteractionFlags(QtCore.Qt.TextSelectableByMouse)
        layout.addWidget(self.title)
        layout.addWidget(self.verdict)
        layout.addWidget(self.values)
        row = QtWidgets.QHBoxLayout()
        self.accept_button = QtWidgets.QPushButton("Accept  (A)")
        self.reject_button = QtWidgets.QPushButton("Reject…  (R)")
        self.accept_button.clicked.connect(self.accept_clicked)
        self.reject_button.clicked.connect(self.reject_clicked)
        row.addWidget(self.accept_button)
        row.addWidget(self.reject_button)
        layout.addLayout(row)

    def show_beat(self, beats: BeatTable | None, row: int, n_in_sweep: int = 0, position: int = 0) -> None:
        if beats is None or not (0 <= row < len(beats)):
            self.title.setText("no beat selected")
            self.verdict.setText("")
            self.values.setText("")
            return
        r = beats.row(row)
        self.title.setText(f"sweep {r['sweep']} · beat {r['beat']}" + (f"  ({position + 1} of {n_in_sweep})" if n_in_sweep else ""))
        accepted = bool(r.get("accepted", 1))
        how = "reviewed" if r.get("reviewed") else "automatic"
        if accepted:
            text = f"<span style='color:#2a7a3f'>✓ accepted</span> ({how})"
        else:
            text = f"<span style='color:{palette.REJECTED_LABEL}'>✕ rejected</span> ({how}): {r.get('reject_reason') or 'no reason given'}"
        if r.get("flags"):
            text += f"<br>flags: {r['flags']}"
        if r.get("condition"):
            text += f"<br>condition: <b>{r['condition']}</b>"
        self.verdict.setText(text)

        def fmt(name: str, d: int = 1) -> str:
            v = r.get(name)
            s = f"{v:.{d}f}" if isinstance(v, float) and math.isfinite(v) else "—"
            col = column(name)
            return f"{col.label:<10}{s:>9} {col.unit}"

        lines = [
            fmt("cl_ms"), fmt("mdp_mV"), fmt("top_mV"), fmt("ddr_mV_per_s"), fmt("dvdt_max_V_per_s", 2),
            fmt("peak_mV"), fmt("apd50_ms"), fmt("apd90_ms"),
        ]
        self.values.setText("\n".join(lines))
