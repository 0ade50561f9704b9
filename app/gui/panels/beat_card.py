"""Reviewing beats: the reason picker and the card describing the beat under review.

A rejection always carries a reason. The picker opens beside the beat with the reasons
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
        self._read: tuple[tuple[int, int], list[str]] | None = None

    def own(self) -> list[str]:
        """The user's own reasons, in the order they were first used."""
        if self.path is None:
            return list(self._kept)
        try:
            st = self.path.stat()
            stamp = (st.st_mtime_ns, st.st_size)
        except OSError:
            return []
        if self._read is None or self._read[0] != stamp:
            # Read again only when the file changed (another window may have added a reason).
            try:
                items = json.loads(self.path.read_text(encoding="utf-8"))
            except (OSError, ValueError):
                items = []
            own = [str(r) for r in items if isinstance(r, str) and r.strip()] if isinstance(items, list) else []
            self._read = (stamp, own)
        return list(self._read[1])

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


class ReasonPicker(QtWidgets.QFrame):
    """The numbered reasons, a panel inside the window. ``picked(str)`` gives the reason chosen.

    It is built once per list of reasons and shown and hidden on each R: no window of its own
    opens, so the window under review stays the active one and nothing beneath it is drawn
    again for the picker's sake. It takes the keyboard while shown (a digit picks, Escape or a
    click elsewhere closes it); each reason is also a button for the mouse.
    """

    picked = QtCore.Signal(str)

    def __init__(self, parent: QtWidgets.QWidget | None = None, *, book: ReasonBook | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("reason_picker")
        self.setFrameShape(QtWidgets.QFrame.StyledPanel)
        self.setAutoFillBackground(True)
        self.setFocusPolicy(QtCore.Qt.StrongFocus)
        if parent is None:
            self.setWindowFlags(QtCore.Qt.Tool | QtCore.Qt.FramelessWindowHint)
        self.book = book if book is not None else ReasonBook()
        self.last_reason: str | None = None
        self._typed = ""
        self._built: list[tuple[int, str]] | None = None
        self._layout = QtWidgets.QVBoxLayout(self)
        self._layout.setContentsMargins(6, 4, 6, 4)
        self._layout.setSpacing(0)
        self._head = QtWidgets.QLabel(self)
        self._head.setStyleSheet("font-weight: bold")
        self._layout.addWidget(self._head)
        self._buttons: list[QtWidgets.QToolButton] = []
        self._return_to: QtWidgets.QWidget | None = None
        self.hide()

    def _build(self, numbered: list[tuple[int, str]]) -> None:
        for button in self._buttons:
            self.removeAction(button.defaultAction())
            button.deleteLater()
        self._buttons = []
        for number, reason in [*numbered, (0, "")]:
            action = QtGui.QAction(f"{number}  {reason}" if reason else "0  other…", self)
            action.setData(reason)
            action.triggered.connect(lambda _checked=False, a=action: self._on_triggered(a))
            self.addAction(action)
            button = QtWidgets.QToolButton(self)
            button.setDefaultAction(action)
            button.setAutoRaise(True)
            button.setFocusPolicy(QtCore.Qt.NoFocus)
            button.setToolButtonStyle(QtCore.Qt.ToolButtonTextOnly)
            button.setSizePolicy(QtWidgets.QSizePolicy.Expanding, QtWidgets.QSizePolicy.Fixed)
            button.setStyleSheet("text-align: left")
            self._layout.addWidget(button)
            self._buttons.append(button)
        self._built = numbered
        self.adjustSize()

    def open_at(self, global_pos: QtCore.QPoint, title: str = "Reject because…", *,
                avoid: QtCore.QRect | None = None) -> None:
        """Show the picker (returns at once; ``picked`` fires when the user chooses).

        ``avoid`` (global coordinates) is the beat and its markers: the picker opens beside it,
        right of it if there is room on its screen, else left of it.
        """
        self._typed = ""
        numbered = self.book.numbered()
        if self._built != numbered:
            self._build(numbered)
        if self._head.text() != title:
            self._head.setText(title)
            self.adjustSize()
        for action in self.reason_actions():
            reason = action.data()
            if reason:
                text = f"{self.book.number_of(reason)}  {reason}" + ("  ◂ last" if reason == self.last_reason else "")
                if action.text() != text:
                    action.setText(text)
                    self.adjustSize()
        corner = self.place(global_pos, avoid)
        parent = self.parentWidget()
        self.move(parent.mapFromGlobal(corner) if parent is not None else corner)
        if not self.isVisible():
            before = QtWidgets.QApplication.focusWidget()
            self._return_to = before if before is not None and before is not self else None
        self.raise_()
        self.show()
        self.setFocus(QtCore.Qt.PopupFocusReason)

    def close(self) -> bool:
        """Hide the picker and give the keyboard back to the window."""
        had_focus = self.hasFocus()
        self.hide()
        back = self._return_to
        self._return_to = None
        if had_focus:
            if back is not None and back.isVisible():
                back.setFocus(QtCore.Qt.PopupFocusReason)
            elif self.parentWidget() is not None:
                self.parentWidget().window().setFocus(QtCore.Qt.PopupFocusReason)
        return True

    def place(self, global_pos: QtCore.QPoint, avoid: QtCore.QRect | None) -> QtCore.QPoint:
        """Where the picker's top-left corner goes so that it leaves ``avoid`` uncovered."""
        if avoid is None:
            return global_pos
        size = self.sizeHint()
        parent = self.parentWidget()
        if parent is not None:
            # Inside the window: beside the beat, within the window's own bounds.
            area = QtCore.QRect(parent.mapToGlobal(QtCore.QPoint(0, 0)), parent.size())
        else:
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

    def focusOutEvent(self, event: QtGui.QFocusEvent) -> None:  # noqa: N802
        super().focusOutEvent(event)
        if event.reason() == QtCore.Qt.MouseFocusReason:
            self.hide()  # a click elsewhere dismisses it, as a menu would be

    def keyPressEvent(self, event: QtGui.QKeyEvent) -> None:  # noqa: N802
        if event.key() == QtCore.Qt.Key_Escape:
            self.close()
            return
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
