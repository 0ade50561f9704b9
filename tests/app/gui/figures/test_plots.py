"""Figures draw the core's figure data per condition and export to PNG and SVG."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from PySide6 import QtCore, QtGui  # noqa: E402

from analysis.readouts import _plotdata as plotdata  # noqa: E402
from app.gui import palette  # noqa: E402
from app.gui.figures.plots import FigureInput, FiguresPanel, export_figure  # noqa: E402

from ..handmade import handmade  # noqa: E402


@pytest.fixture
def panel(qtbot):
    rec, beats = handmade(n_sweeps=2, seconds=16.0)
    rng = np.random.default_rng(0)
    n = len(beats)
    cond = np.where(beats["sweep"] == 0, "baseline", "drug")
    cl = np.where(np.isfinite(beats["cl_ms"]), 800.0 + rng.normal(0, 20, n), np.nan)
    ddr = np.where(np.isfinite(cl), 60.0 - 0.04 * cl + rng.normal(0, 1, n), np.nan)
    beats = beats.with_columns(condition=cond, cl_ms=cl, ddr_mV_per_s=ddr)
    w = FiguresPanel()
    qtbot.addWidget(w)
    w.resize(900, 600)
    w.show()
    data = FigureInput(rec, beats, groups=[("baseline", "#3a86ff"), ("drug", "#ef476f")],
                       spans=[("baseline", 0.0, 16.0, "#3a86ff"), ("drug", 16.0, 32.0, "#ef476f")], current_row=3)
    w.set_input(data)
    return w, data


def test_fits_and_pairs_are_the_cores(panel):
    w, data = panel
    w.redraw()
    ddr = w.figures["ddr_cl"]
    rows = np.flatnonzero(data.beats["condition"] == "drug")
    ref = plotdata.fit_line(data.beats["cl_ms"][rows], data.beats["ddr_mV_per_s"][rows])
    assert ddr.fits["drug"] == ref  # the line drawn is the core's fit
    x, y = w.figures["poincare"].pairs["baseline"]
    base = np.flatnonzero(data.beats["condition"] == "baseline")
    assert np.array_equal(x, data.beats["cl_ms"][base][1:-1]) and np.array_equal(y, data.beats["cl_ms"][base][2:])
    avg = w.figures["aligned"].averages["baseline"]
    assert np.allclose(avg.mean, np.nanmedian(avg.traces, axis=0))  # numpy reference: the sample-wise median


def test_export_png_and_svg(panel, tmp_path):
    w, _ = panel
    png = export_figure(w.figures["time_course"], tmp_path / "tc.png", width_px=1200)
    assert QtGui.QImage(png).width() == 1200
    svg = export_figure(w.figures["ddr_cl"], tmp_path / "ddr.svg")
    assert "<svg" in open(svg, encoding="utf-8").read(2000)
    paths = w.export_all(tmp_path / "all", fmt="png")
    assert len(paths) == 5 and all(QtGui.QImage(p).width() == 1600 for p in paths)


def test_export_dialog_says_why_a_figure_cannot_be_written(panel, tmp_path, monkeypatch):
    """A folder that is not there: one warning naming the file, nothing written (common practice,
    no source)."""
    from PySide6 import QtWidgets

    w, _ = panel
    target = tmp_path / "no-such-folder" / "rate.png"
    monkeypatch.setattr(QtWidgets.QFileDialog, "getSaveFileName", lambda *a, **k: (str(target), ""))
    warned = []
    monkeypatch.setattr(QtWidgets.QMessageBox, "warning", lambda parent, title, text: warned.append((title, text)))
    w._export_dialog()
    assert len(warned) == 1 and warned[0][0] == "Export figure" and str(target) in warned[0][1]
    assert not target.parent.exists()


def test_only_the_figure_shown_is_drawn_until_another_tab_opens(panel):
    w, data = panel
    w.set_input(data)
    assert w._dirty == {"phase_plane", "time_course", "poincare", "ddr_cl"}  # "aligned" is the tab shown
    w.tabs.setCurrentIndex(4)
    assert "ddr_cl" not in w._dirty and w.figures["ddr_cl"].fits


@pytest.fixture
def steady_window(cell_window, cell_result):
    """The window on the two-sweep cell with one condition over both sweeps whose summary uses
    only its last 5 s, and a beat rejected inside that window."""
    from analysis.conditions import Condition, SteadyState

    w = cell_window(size=(1400, 900))
    rec, _ = cell_result
    assert w.key is not None
    end = rec.sweep_starts_s[-1] + rec.n_samples(rec.n_sweeps - 1) / rec.sampling_rate_hz
    assert w.add_condition(Condition("baseline", 0.0, end, "s", SteadyState("last_s", 5.0)))  # the whole recording
    t = plotdata.recording_times_s(w.session.beats(w.key), rec.sweep_starts_s)
    w.select_beat(int(np.flatnonzero(t > t.max() - 3.0)[0]))
    w.reject_current("noise")
    assert w.settle(60_000)
    w.figures.redraw({"aligned"})
    return w


def _last_5_s(beats, sweep_starts_s) -> np.ndarray:
    """The rule 'last 5 s' by hand: accepted beats with a diastole and a full repolarisation
    within 5 s of the condition's last such beat (the window rule of docs/user-guide.md;
    common practice, no source)."""
    t = plotdata.recording_times_s(beats, sweep_starts_s)
    clean = np.array([not {"no_diastole", "truncated"} & set(str(f).split(";")) for f in beats["flags"]])
    ok = (np.asarray(beats["accepted"]) == 1) & clean & (np.asarray(beats["condition"]) == "baseline")
    end = t[ok].max()
    return np.flatnonzero(ok & (t > end - 5.0))


def test_aligned_beats_are_the_summarys_steady_window(steady_window, tmp_path):
    w = steady_window
    beats = w.session.beats(w.key)
    (summary,) = [s for s in w.session.summaries(w.key) if s.values["condition"] == "baseline"]
    n = int(summary.values["n_used"])
    in_condition = int(np.sum((beats["condition"] == "baseline") & (beats["accepted"] == 1)))
    by_hand = _last_5_s(beats, w.recording.sweep_starts_s)
    assert n == by_hand.size and 4 <= n < in_condition - 5  # the window is shorter than the condition
    assert w.summary_panel.cell_text("beats used / in window / all").startswith(f"{n} / ")
    figure = w.figures.figures["aligned"]
    assert figure.legend_texts()[0] == f"baseline: n = {n} (steady window)"
    avg = figure.averages["baseline"]
    assert np.array_equal(np.sort(avg.rows), by_hand)  # the very beats the summary used
    assert np.allclose(avg.mean, np.nanmedian(avg.traces, axis=0), equal_nan=True)  # numpy reference: the sample-wise median

    # A beat inside the window rejected: the figure follows the summary once its job is back.
    w.select_beat(int(by_hand[by_hand.size // 2]))
    w.reject_current("noise")
    assert w.settle(60_000)
    w.figures.redraw({"aligned"})
    by_hand = _last_5_s(w.session.beats(w.key), w.recording.sweep_starts_s)
    assert by_hand.size == n - 1  # the window still ends at the same beat
    n -= 1
    assert figure.legend_texts()[0] == f"baseline: n = {n} (steady window)"
    assert np.array_equal(np.sort(figure.averages["baseline"].rows), by_hand)

    # Read back from the results file (summaries stored without their rows): the same beats.
    out = tmp_path / "steady.h5"
    assert w.save_results(out) and w.revert_to_saved()
    assert w.settle(60_000)
    w.figures.redraw({"aligned"})
    assert figure.legend_texts()[0] == f"baseline: n = {n} (steady window)"
    assert np.array_equal(np.sort(figure.averages["baseline"].rows), by_hand)


def test_summary_rows_read_back_match_the_rows_the_summary_listed(steady_window):
    from analysis.stats import Summary
    from app.gui.figures.plots import summary_beat_rows

    w = steady_window
    beats = w.session.beats(w.key)
    summaries = w.session.summaries(w.key)
    listed = summary_beat_rows(beats, summaries, w.recording.sweep_starts_s)
    # As a results file holds them: the values alone, no rows.
    stored = [Summary(dict(s.values), s.steady_suggestion, s.steady_note) for s in summaries]
    assert all(s.beat_rows.size == 0 for s in stored)
    again = summary_beat_rows(beats, stored, w.recording.sweep_starts_s)
    assert listed.keys() == again.keys() and len(listed) >= 1
    for name, (rows, rule) in listed.items():
        assert np.array_equal(again[name][0], rows) and again[name][1] == rule
        assert rows.size == sum(int(s.values["n_used"]) for s in summaries if s.values["condition"] == name)


def test_without_summaries_the_legend_says_every_accepted_beat(panel):
    w, data = panel
    w.redraw({"aligned"})
    n = int(np.sum((data.beats["condition"] == "baseline") & (data.beats["accepted"] == 1)))
    assert w.figures["aligned"].legend_texts()[0] == f"baseline: n = {n} (accepted beats)"


def test_time_course_names_its_conditions_on_paper_labels_above_the_points(panel, qtbot):
    from app.gui.views.bands import BandLabels
    from app.gui.views.overview import OverviewStrip

    w, data = panel
    w.tabs.setCurrentIndex(2)  # the time course, shown so that its labels are laid out
    figure = w.figures["time_course"]
    qtbot.waitUntil(lambda: all(label.isVisible() for label in figure.condition_names.items))
    labels = figure.condition_names.items
    assert [label.textItem.toPlainText() for label in labels] == ["baseline", "drug"]
    # The very labels the overview strip puts on its conditions (one class, not a copy).
    strip = OverviewStrip()
    qtbot.addWidget(strip)
    assert type(figure.condition_names) is type(strip.condition_names) is BandLabels
    header = figure.header.getViewBox()
    rate_box = figure.plots[0].getViewBox().sceneBoundingRect()
    for label, (_name, a, b, colour) in zip(labels, data.spans):
        assert label.fill.style() != QtCore.Qt.NoBrush
        assert 0 < label.fill.color().alpha() < 255  # semi-opaque
        assert label.fill.color().name() == palette.PAPER
        assert label.border.color().name() == colour
        rect = label.mapRectToScene(label.boundingRect())
        assert header.sceneBoundingRect().contains(rect)
        left, right = (header.mapViewToScene(QtCore.QPointF(x, 0.5)).x() for x in (a, b))
        assert left <= rect.left() and rect.right() <= right  # inside its condition's span
        assert rect.bottom() <= rate_box.top()  # above the rate points: it covers none of them
