"""Every label the window and the figures show for a beat column is the catalogue's
(:mod:`analysis.columns`), read back from the widgets themselves."""

from __future__ import annotations

import numpy as np

import pytest

pytest.importorskip("pytestqt")

from PySide6 import QtCore  # noqa: E402

from analysis.columns import CATALOGUE, column  # noqa: E402
from analysis.stats import PARAMETERS  # noqa: E402
from app.gui import palette  # noqa: E402
from app.gui.views.beat_table import SHOWN_COLUMNS, BeatTableView  # noqa: E402
from app.gui.views.overview import OverviewStrip  # noqa: E402
from app.gui.figures.plots import DdrClFigure, PoincareFigure, TimeCourseFigure  # noqa: E402
from app.gui.panels.beat_card import BeatCard  # noqa: E402
from app.gui.panels.summary_panel import summary_rows  # noqa: E402
from app.gui.views.trace_view import MARKER_COLUMNS, TraceView  # noqa: E402

from .handmade import handmade  # noqa: E402


def test_the_beat_tables_headers_and_tooltips_are_the_catalogues(qtbot):
    w = BeatTableView()
    qtbot.addWidget(w)
    _rec, beats = handmade(n_sweeps=1)
    w.set_table(beats)
    model = w.beat_model
    names = model.column_names()
    assert names == [n for n in SHOWN_COLUMNS if n in beats]  # every shown column is there
    for i, name in enumerate(names):
        assert model.headerData(i, QtCore.Qt.Horizontal) == column(name).header, name
        assert model.headerData(i, QtCore.Qt.Horizontal, QtCore.Qt.ToolTipRole) == f"{name}: {column(name).description}"
    # The header text itself: label over unit (the window's wording, unchanged by the catalogue).
    assert model.headerData(names.index("apd90_ms"), QtCore.Qt.Horizontal) == "APD90\n(ms)"
    assert model.headerData(names.index("accepted"), QtCore.Qt.Horizontal) == "kept"


def test_the_beat_cards_lines_carry_the_catalogues_labels_and_units(qtbot):
    card = BeatCard()
    qtbot.addWidget(card)
    _rec, beats = handmade(n_sweeps=1)
    card.show_beat(beats, 2)
    lines = card.value_lines()
    # Every measured parameter of the catalogue but the upstroke's time (the title says where).
    names = [c.name for c in CATALOGUE if c.kind == "measured" and c.name != "t_upstroke_s"]
    assert {"apa_mV", "apd20_ms", "ddr100_mV_per_s"} <= set(names)
    assert len(lines) == len(names)
    for line, name in zip(lines, names):
        c = column(name)
        value = float(beats[name][2]) if name in beats else float("nan")
        assert line.startswith(f"{c.label} ") and line.endswith(f" {c.unit}"), line
        if not np.isfinite(value):
            assert " — " in line, line  # undefined, never a number (CONTRACT.md)
        else:
            assert f"{value:.2f}" in line if name == "dvdt_max_V_per_s" else f"{value:.1f}" in line


def test_the_trace_tooltip_names_values_by_the_catalogues_labels(qtbot):
    view = TraceView()
    qtbot.addWidget(view)
    _rec, beats = handmade(n_sweeps=1)
    view.set_beats(beats)
    text = view.describe_beat(2)
    for name in ("cl_ms", "mdp_mV", "dvdt_max_V_per_s", "apd90_ms"):
        c = column(name)
        assert f"{c.label} {float(beats[name][2]):.1f} {c.unit}" in text


def test_markers_are_named_by_their_columns_labels():
    for kind, (t_name, v_name) in MARKER_COLUMNS.items():
        owner = {"upstroke": "t_upstroke_s", "apd90": "apd90_ms"}.get(kind, v_name)
        assert palette.MARKERS[kind][0] == column(owner).label, kind
        assert column(t_name).kind in ("marker", "measured")


def _axis(plot, side: str) -> tuple[str, str]:
    axis = plot.getAxis(side)
    return axis.labelText, axis.labelUnits


def test_figure_axes_are_the_catalogues(qtbot):
    tc = TimeCourseFigure()
    qtbot.addWidget(tc)
    for plot, (name, label, unit) in zip(tc.plots, tc.ROWS):
        assert (label, unit) == (column(name).label, column(name).unit)
        assert _axis(plot, "left") == (column(name).label, column(name).unit)
    ddr = DdrClFigure()
    qtbot.addWidget(ddr)
    assert _axis(ddr.plot, "bottom") == (column("cl_ms").label, column("cl_ms").unit)
    assert _axis(ddr.plot, "left") == (column("ddr_mV_per_s").label, column("ddr_mV_per_s").unit)
    poincare = PoincareFigure()
    qtbot.addWidget(poincare)
    assert _axis(poincare.plot, "left") == (f"{column('cl_ms').label} n+1", column("cl_ms").unit)
    strip = OverviewStrip()
    qtbot.addWidget(strip)
    assert _axis(strip.rate_plot, "left")[0] == column("rate_bpm").axis_label


def test_summary_rows_are_labelled_by_the_catalogue():
    values = {f"{stem}_mean_{unit}": 1.0 for _c, stem, unit in PARAMETERS}
    labels = [label for label, _text in summary_rows(values)]
    for name, _stem, _unit in PARAMETERS:
        assert column(name).axis_label in labels, name
    assert f"{column('apd90_ms').label} STV ({column('apd90_ms').unit})" in labels
    assert dict(summary_rows(values))[column("mdp_mV").axis_label] == "1.0 ± —"  # no SD given: undefined
