"""Reviewing beats: the reason picker and the card describing the beat under review.

A rejection always carries a reason. The picker pops up beside the beat with the reasons
numbered for good: the built-in ones 1-8, then the user's own in the order they were first
typed (9, 10, ...), kept in ``reasons.json`` in the app's configuration folder so that a number
means the same reason tomorrow. A digit picks its reason (two digits in a row for 10 and up);
0 or "other…" asks for a new one.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

from PySide6 import QtCore, QtGui, QtWidgets

from analysis.columns import CATALOGUE, column
from analysis.results import write_text_atomic
from analysis.table import BeatTable

from .. import palette
from ..views.beat_overlay import BeatOverlay

__all__ = ["REASONS", "ReasonBook", "ReasonPicker", "BeatCard", "CARD_COLUMNS"]

#: The built-in reasons for a rejection, numbered 1-8 in this order for good (append only).
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


class ReasonBook:
    """The numbered reasons: the built-in ones, then the user's own, remembered in a file.

    Parameters
    ----------
    folder : Path or None
        Where ``reasons.json`` lives (the app's configuration folder); None: nowhere, the user's
        reasons last as long as the book.
    """

    def __init__(self, folder: Path | None = None) -> None:
        self.path = Path(folder) / "reasons.json" if folder is not None else None
        self._kept: list[str] = []

    def own(self) -> list[str]:
        """The user's own reasons, in the order they were first used."""
        if self.path is None:
            return list(self._kept)
        try:
            items = json.loads(self.path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return []
        return [str(r) for r in items if isinstance(r, str) and r.strip()] if isinstance(items, list) else []

    def numbered(self) -> list[tuple[int, str]]:
        """Every reason with its number (1 up)."""
        return list(enumerate([*REASONS, *self.own()], start=1))

    def number_of(self, reason: str) -> int | None:
        return next((n for n, r in self.numbered() if r == reason), None)

    def remember(self, reason: str) -> int:
        """Give a new reason the next number (an old one keeps its own); returns the number."""
        known = self.number_of(reason)
        if known is not None:
            return known
        own = [*self.own(), reason]
        if self.path is None:
            self._kept = own
        else:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            write_text_atomic(self.path, json.dumps(own, indent=1))
        return len(REASONS) + len(own)


class ReasonPicker(QtWidgets.QMenu):
    """A non-blocking menu of numbered reasons. ``picked(str)`` gives the reason chosen."""

    picked = QtCore.Signal(str)

    def __init__(self, parent: QtWidgets.QWidget | None = None, *, book: ReasonBook | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("reason_picker")
        self.book = book if book is not None else ReasonBook()
        self.last_reason: str | None = None
        self._typed = ""
        self._built: list[tuple[int, str]] | None = None
        self._head: QtGui.QAction | None = None
        self.triggered.connect(self._on_triggered)

    def open_at(self, global_pos: QtCore.QPoint, title: str = "Reject because…", *,
                avoid: QtCore.QRect | None = None) -> None:
        """Show the picker (returns at once; ``picked`` fires when the user chooses).

        ``avoid`` (global coordinates) is the beat and its markers: the picker opens beside it,
        right of it if there is room on its screen, else left of it.
        """
        self._typed = ""
        numbered = self.book.numbered()
        if self._built != numbered:
            # Built once per list of reasons: opening the picker on every R costs no widgets.
            self.clear()
            self._head = self.addAction(title)
            self._head.setEnabled(False)
            for number, reason in numbered:
                self.addAction(f"{number}  {reason}").setData(reason)
            self.addSeparator()
            self.addAction("0  other…").setData("")
            self._built = numbered
        self._head.setText(title)
        for action in self.reason_actions():
            reason = action.data()
            if reason:
                number = self.book.number_of(reason)
                text = f"{number}  {reason}" + ("  ◂ last" if reason == self.last_reason else "")
                if action.text() != text:
                    action.setText(text)
        self.popup(self.place(global_pos, avoid))

    def place(self, global_pos: QtCore.QPoint, avoid: QtCore.QRect | None) -> QtCore.QPoint:
        """Where the picker's top-left corner goes so that it leaves ``avoid`` uncovered."""
        if avoid is None:
            return global_pos
        size = self.sizeHint()
        screen = QtGui.QGuiApplication.screenAt(avoid.center()) or QtGui.QGuiApplication.primaryScreen()
        area = screen.availableGeometry() if screen is not None else QtCore.QRect(0, 0, 10_000, 10_000)
        top = max(area.top(), min(avoid.top(), area.bottom() - size.height()))
        if avoid.right() + 12 + size.width() <= area.right():
            return QtCore.QPoint(avoid.right() + 12, top)
        return QtCore.QPoint(max(area.left(), avoid.left() - 12 - size.width()), top)

    def reason_actions(self) -> list[QtGui.QAction]:
        return [a for a in self.actions() if a.data() is not None and a.isEnabled()]

    def reason_for_number(self, number: int) -> str | None:
        """The reason a number picks ("" for 0: a new reason; None: no such number)."""
        if number == 0:
            return ""
        return dict(self.book.numbered()).get(number)

    def keyPressEvent(self, event: QtGui.QKeyEvent) -> None:  # noqa: N802
        text = event.text()
        if not (text.isdigit() and len(text) == 1):
            super().keyPressEvent(event)
            return
        typed = self._typed + text
        count = len(self.book.numbered())
        # A digit that could start a longer number waits for the next one.
        if int(typed) * 10 <= count and typed != "0":
            self._typed = typed
            return
        self._typed = ""
        reason = self.reason_for_number(int(typed))
        if reason is not None:
            action = next(a for a in self.reason_actions() if a.data() == reason)
            action.trigger()

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
            self.book.remember(reason)
        self.last_reason = reason
        window = self.parentWidget().window() if self.parentWidget() is not None else None
        if window is not None:
            window.activateWindow()  # the keys go back to the window's shortcuts
        self.picked.emit(reason)


#: The measured parameters the card shows: every one of the catalogue, in its order.
CARD_COLUMNS = tuple(c.name for c in CATALOGUE if c.kind == "measured" and c.name != "t_upstroke_s")

_VERDICT_TEXT = {
    "accepted": ("#2a7a3f", "✓ accepted"),
    "rejected": (palette.REJECTED_LABEL, "✕ rejected"),
    "to_review": (palette.FLAG_LABEL, "? waiting for a look (left out of the summaries)"),
}


def _value_text(value, name: str) -> str:
    if not (isinstance(value, float) and math.isfinite(value)):
        return "—"
    decimals = 2 if name == "dvdt_max_V_per_s" else 1
    return f"{value:.{decimals}f}"


class BeatCard(QtWidgets.QFrame):
    """The beat under review: where it is, its verdict, every measured parameter, and (beside
    them) the beat drawn over its condition's mean beat."""

    accept_clicked = QtCore.Signal()
    reject_clicked = QtCore.Signal()

    def __init__(self, parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("beat_card")
        self.setFrameShape(QtWidgets.QFrame.StyledPanel)
        layout = QtWidgets.QVBoxLayout(self)
        layout.setContentsMargins(6, 4, 6, 4)
        layout.setSpacing(2)
        self.title = QtWidgets.QLabel("no beat selected")
        self.title.setObjectName("beat_card_title")
        self.title.setStyleSheet("font-size: 11pt; font-weight: bold;")
        self.verdict = QtWidgets.QLabel("")
        self.verdict.setWordWrap(True)
        layout.addWidget(self.title)
        layout.addWidget(self.verdict)
        body = QtWidgets.QHBoxLayout()
        grid = QtWidgets.QGridLayout()
        grid.setHorizontalSpacing(6)
        grid.setVerticalSpacing(0)
        self.value_labels: dict[str, QtWidgets.QLabel] = {}
        half = (len(CARD_COLUMNS) + 1) // 2
        for i, name in enumerate(CARD_COLUMNS):
            col = column(name)
            r, c = i % half, 3 * (i // half)
            head = QtWidgets.QLabel(col.label)
            head.setToolTip(col.description)
            value = QtWidgets.QLabel("—")
            value.setObjectName(f"card_{name}")
            value.setAlignment(QtCore.Qt.AlignRight | QtCore.Qt.AlignVCenter)
            value.setStyleSheet("font-family: monospace;")
            value.setTextInteractionFlags(QtCore.Qt.TextSelectableByMouse)
            unit = QtWidgets.QLabel(col.unit)
            unit.setStyleSheet("color: #667;")
            grid.addWidget(head, r, c)
            grid.addWidget(value, r, c + 1)
            grid.addWidget(unit, r, c + 2)
            self.value_labels[name] = value
        body.addLayout(grid)
        self.overlay = BeatOverlay()
        body.addWidget(self.overlay, 1)
        layout.addLayout(body)
        row = QtWidgets.QHBoxLayout()
        self.accept_button = QtWidgets.QPushButton("Accept  (A)")
        self.reject_button = QtWidgets.QPushButton("Reject…  (R)")
        self.accept_button.clicked.connect(self.accept_clicked)
        self.reject_button.clicked.connect(self.reject_clicked)
        row.addWidget(self.accept_button)
        row.addWidget(self.reject_button)
        layout.addLayout(row)

    def value_lines(self) -> list[str]:
        """The values shown, one parameter a line: label, value, unit."""
        return [f"{column(n).label} {self.value_labels[n].text()} {column(n).unit}" for n in CARD_COLUMNS]

    def show_beat(self, beats: BeatTable | None, row: int, n_in_sweep: int = 0, position: int = 0) -> None:
        if beats is None or not (0 <= row < len(beats)):
            self.title.setText("no beat selected")
            self.verdict.setText("")
            for label in self.value_labels.values():
                label.setText("—")
            self.overlay.blank()
            return
        r = beats.row(row)
        self.title.setText(f"sweep {r['sweep']} · beat {r['beat']}" + (f"  ({position + 1} of {n_in_sweep})" if n_in_sweep else ""))
        verdict = r.get("verdict") or ("accepted" if r.get("accepted", 1) else "rejected")
        colour, words = _VERDICT_TEXT.get(verdict, (palette.INK, verdict))
        who = r.get("decided_by") or ("user" if r.get("reviewed") else "auto")
        text = f"<span style='color:{colour}'>{words}</span> ({'your verdict' if who == 'user' else 'automatic'})"
        if verdict == "rejected":
            text += f": {r.get('reject_reason') or 'no reason given'}"
        extra = [f"flags: {r['flags']}"] if r.get("flags") else []
        if r.get("condition"):
            extra.append(f"condition: <b>{r['condition']}</b>")
        self.verdict.setText(text + ("<br>" + " · ".join(extra) if extra else ""))
        for name, label in self.value_labels.items():
            label.setText(_value_text(r.get(name), name))
