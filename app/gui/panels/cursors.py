"""The gates: the panel that reads out what lies between the trace view's two gate lines.

The numbers come from :func:`analysis.readouts.readout`, called when a cursor drag finishes
(not on every pixel of the drag), over the samples between the cursors.
"""

from __future__ import annotations

import math

from PySide6 import QtCore, QtWidgets

from analysis.readouts import CursorReadout

from .. import palette

__all__ = ["CursorPanel", "READOUT_ROWS"]

#: (attribute, label, unit pattern, decimals): the readout's rows in order.
READOUT_ROWS = (
    ("t0_s", "◧ from", "s", 4),
    ("t1_s", "to ◨", "s", 4),
    ("delta_t_ms", "gated", "ms", 2),
    ("delta_value", "rise (to − from)", "{u}", 2),
    ("mean_value", "average", "{u}", 2),
    ("min_value", "lowest", "{u}", 2),
    ("max_value", "highest", "{u}", 2),
    ("slope_per_s", "trend (least squares)", "{u}/s", 2),
    ("n_samples", "samples", "", 0),
)


def _fmt(value: float, decimals: int) -> str:
    if isinstance(value, float) and not math.isfinite(value):
        return "—"
    return f"{value:.{decimals}f}" if decimals else f"{int(value)}"


class CursorPanel(QtWidgets.QWidget):
    """Readout of the two gates, with buttons to show them and to reject the beats inside."""

    toggled = QtCore.Signal(bool)
    reject_between = QtCore.Signal()

    def __init__(self, parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("cursor_panel")
        layout = QtWidgets.QVBoxLayout(self)
        layout.setContentsMargins(6, 6, 6, 6)
        buttons = QtWidgets.QHBoxLayout()
        self.show_button = QtWidgets.QPushButton("Gates")
        self.show_button.setCheckable(True)
        self.show_button.setToolTip("Show the two gates on the trace (drag them; the numbers follow when you let go)")
        self.show_button.toggled.connect(self.toggled)
        self.reject_button = QtWidgets.QPushButton("Reject beats inside")
        self.reject_button.setToolTip("Reject every beat whose upstroke lies between the gates, with one reason")
        self.reject_button.clicked.connect(self.reject_between)
        buttons.addWidget(self.show_button)
        buttons.addWidget(self.reject_button)
        layout.addLayout(buttons)

        grid = QtWidgets.QGridLayout()
        grid.setHorizontalSpacing(10)
        grid.setVerticalSpacing(2)
        self.values: dict[str, QtWidgets.QLabel] = {}
        self.units: dict[str, QtWidgets.QLabel] = {}
        for i, (attr, label, _unit, _d) in enumerate(READOUT_ROWS):
            name = QtWidgets.QLabel(label)
            value = QtWidgets.QLabel("—")
            value.setObjectName(f"readout_{attr}")
            value.setAlignment(QtCore.Qt.AlignRight | QtCore.Qt.AlignVCenter)
            value.setTextInteractionFlags(QtCore.Qt.TextSelectableByMouse)
            value.setStyleSheet("font-family: monospace; font-size: 11pt;")
            unit = QtWidgets.QLabel("")
            if attr in ("t0_s", "t1_s"):
                colour = palette.CURSORS[0 if attr == "t0_s" else 1][0]
                name.setStyleSheet(f"color: {colour}; font-weight: bold;")
            grid.addWidget(name, i, 0)
            grid.addWidget(value, i, 1)
            grid.addWidget(unit, i, 2)
            self.values[attr] = value
            self.units[attr] = unit
        self.beats_label = QtWidgets.QLabel("upstrokes inside: —")
        self.beats_label.setObjectName("readout_beats")
        self.beats_label.setWordWrap(True)
        grid.addWidget(self.beats_label, len(READOUT_ROWS), 0, 1, 3)
        grid.setColumnStretch(1, 1)
        layout.addLayout(grid)
        layout.addStretch(1)
        self.readout: CursorReadout | None = None

    def set_cursors_shown(self, shown: bool) -> None:
        self.show_button.blockSignals(True)
        self.show_button.setChecked(shown)
        self.show_button.blockSignals(False)

    def show_readout(self, readout: CursorReadout | None, beat_numbers: list[int] | None = None) -> None:
        """Show a readout; ``beat_numbers`` are the spanned beats' numbers in their sweep."""
        self.readout = readout
        for attr, _label, unit, decimals in READOUT_ROWS:
            if readout is None:
                self.values[attr].setText("—")
                continue
            self.values[attr].setText(_fmt(getattr(readout, attr), decimals))
            self.units[attr].setText(unit.format(u=readout.units))
        if readout is None:
            self.beats_label.setText("upstrokes inside: —")
            return
        numbers = beat_numbers if beat_numbers is not None else list(readout.beats)
        listed = ", ".join(str(n) for n in numbers[:12]) + (" …" if len(numbers) > 12 else "")
        self.beats_label.setText(f"upstrokes inside: {readout.n_beats}" + (f"  ({listed})" if numbers else ""))

    def value_text(self, attr: str) -> str:
        return self.values[attr].text()
