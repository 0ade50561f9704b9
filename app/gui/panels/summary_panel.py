"""The condition summary: each condition's parameters and variability, side by side.

One column per condition (and sweep group), one row per parameter: mean ± SD of every per-beat
parameter, then the cycle-length variability with the mean rate beside it (variability falls
with rate), then the window used, the counts and the cell-type hint with its rule. The values
are the core's summaries (:func:`analysis.stats.summarize`); nothing is computed here.
"""

from __future__ import annotations

import math
from typing import Mapping, Sequence

from PySide6 import QtCore, QtGui, QtWidgets

from analysis.columns import column
from analysis.stats import PARAMETERS

from .. import palette

__all__ = ["SummaryPanel", "summary_rows"]



def _num(value, decimals: int = 1) -> str:
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "—"
    return f"{value:.{decimals}f}"


def summary_rows(values: Mapping[str, object]) -> list[tuple[str, str]]:
    """The panel's rows for one summary: ``(label, text)``."""
    rows: list[tuple[str, str]] = [
        ("beats used / in window / all", f"{values.get('n_used', 0)} / {values.get('n_in_window', 0)} / {values.get('n_beats', 0)}"),
        ("rejected, to review", f"{values.get('n_rejected', 0)}, {values.get('n_to_review', 0)}"),
        ("window (s)", f"{_num(values.get('window_start_s'), 1)}–{_num(values.get('window_end_s'), 1)}"),
    ]
    for col, stem, unit in PARAMETERS:
        mean, sd = values.get(f"{stem}_mean_{unit}"), values.get(f"{stem}_sd_{unit}")
        d = 2 if stem == "dvdt_max" else 1
        rows.append((column(col).axis_label, f"{_num(mean, d)} ± {_num(sd, d)}"))
    cl, rate, apd90, ddr = (column(n) for n in ("cl_ms", "rate_bpm", "apd90_ms", "ddr_mV_per_s"))
    rows += [
        (f"mean {rate.axis_label}", _num(values.get("rate_mean_bpm"), 1)),
        (f"{cl.label} CV (%)", _num(values.get("cl_cv_pct"), 2)),
        (f"{cl.label} RMSSD ({cl.unit})", _num(values.get("cl_rmssd_ms"), 1)),
        (f"SD1 / SD2 ({cl.unit})", f"{_num(values.get('cl_sd1_ms'), 1)} / {_num(values.get('cl_sd2_ms'), 1)}"),
        (f"{apd90.label} STV ({apd90.unit})", _num(values.get("apd90_stv_ms"), 2)),
        (f"{cl.label}-{ddr.label} slope, r", f"{_num(values.get('ddr_cl_slope_ms_per_mV_per_s'), 3)}, {_num(values.get('ddr_cl_r'), 2)}"),
        ("cell-type hint", str(values.get("cell_type_hint", "")) or "—"),
    ]
    return rows


class SummaryPanel(QtWidgets.QTableWidget):
    """A read-only grid: parameters down, conditions across."""

    def __init__(self, parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("summary_panel")
        self.setEditTriggers(QtWidgets.QAbstractItemView.NoEditTriggers)
        self.setAlternatingRowColors(True)
        font = self.font()
        font.setPointSizeF(max(7.5, font.pointSizeF() - 1))
        self.setFont(font)
        self.verticalHeader().setFont(font)
        self.horizontalHeader().setFont(font)
        self.verticalHeader().setDefaultSectionSize(18)
        self.verticalHeader().setMinimumSectionSize(16)
        self.horizontalHeader().setStretchLastSection(False)
        # The conditions share the width (no sideways scrolling in a narrow window).
        self.horizontalHeader().setSectionResizeMode(QtWidgets.QHeaderView.Stretch)
        self.summaries: list[Mapping[str, object]] = []
        self.show_summaries([])

    def show_summaries(self, summaries: Sequence[Mapping[str, object]], colours: Mapping[str, str] | None = None,
                       hints: Sequence[str] | None = None, updating: set[str] | frozenset = frozenset()) -> None:
        """Show summaries (each a mapping of summary column -> value).

        The same conditions as shown (a verdict changed one of them) change only the cells whose
        text changed. ``updating`` names conditions whose ensemble beat is being made again
        (their header says so until the next call).
        """
        if self._same_layout(summaries) and self.summaries:
            self.summaries = list(summaries)
            for c, v in enumerate(self.summaries):
                for r, (_label, text) in enumerate(summary_rows(v)):
                    item = self.item(r, c)
                    if item.text() != text:
                        item.setText(text)
                self._mark_updating(c, str(v.get("condition", "")) in updating)
            return
        self.summaries = list(summaries)
        colours = colours or {}
        if not self.summaries:
            self.setRowCount(1)
            self.setColumnCount(1)
            self.setHorizontalHeaderLabels(["summary"])
            self.setVerticalHeaderLabels([""])
            self.setItem(0, 0, QtWidgets.QTableWidgetItem("no accepted beats yet"))
            return
        table = [summary_rows(v) for v in self.summaries]
        labels = [label for label, _ in table[0]]
        self.setRowCount(len(labels))
        self.setColumnCount(len(table))
        self.setVerticalHeaderLabels(labels)
        heads = []
        for v in self.summaries:
            name = str(v.get("condition") or "outside conditions")
            group = str(v.get("sweep_group", "all"))
            heads.append(name if group == "all" else f"{name} (sweep {group})")
        self.setHorizontalHeaderLabels(heads)
        for c, (rows, v) in enumerate(zip(table, self.summaries)):
            colour = colours.get(str(v.get("condition", "")))
            if colour:
                head = self.horizontalHeaderItem(c)
                head.setForeground(QtGui.QBrush(QtGui.QColor(colour)))
                font = head.font()
                font.setBold(True)
                head.setFont(font)
            for r, (_label, text) in enumerate(rows):
                item = QtWidgets.QTableWidgetItem(text)
                item.setTextAlignment(QtCore.Qt.AlignRight | QtCore.Qt.AlignVCenter)
                if labels[r] == "cell-type hint":
                    item.setToolTip(f"{v.get('cell_type_rule', '')}\nA hint from the rule shown, not a classification.")
                    item.setForeground(QtGui.QBrush(QtGui.QColor(palette.ENVELOPE)))
                self.setItem(r, c, item)

    def _same_layout(self, summaries: Sequence[Mapping[str, object]]) -> bool:
        key = [(v.get("condition"), v.get("sweep_group")) for v in summaries]
        return key == [(v.get("condition"), v.get("sweep_group")) for v in self.summaries]

    def _mark_updating(self, column: int, on: bool) -> None:
        head = self.horizontalHeaderItem(column)
        text = head.text().removesuffix(" …")
        head.setText(text + " …" if on else text)
        head.setToolTip("ensemble beat being made again" if on else "")

    def cell_text(self, label: str, column: int = 0) -> str:
        for r in range(self.rowCount()):
            if self.verticalHeaderItem(r).text() == label:
                return self.item(r, column).text()
        raise KeyError(label)
