"""The review loop on the demo recording: keys to the beats that need a look, the table's filter,
a verdict's quick summary against the core's full one, the beat over its condition's mean, dV/dt,
and the window at 1366x768."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from PySide6 import QtCore
from PySide6.QtTest import QTest

from analysis import open_recording
from analysis.pipeline import analyze
from app.demo_data import demo_paths
from app.gui.window.main_window import MainWindow


@pytest.fixture(scope="module")
def demo_result():
    paths = demo_paths()
    if paths.gap_free is None:
        pytest.skip("the demo recording is not bundled")
    rec = open_recording(paths.gap_free)
    return paths, rec, analyze(rec, label=paths.gap_free.name)


@pytest.fixture
def demo(qtbot, demo_result):
    paths, rec, result = demo_result
    w = MainWindow(interactive=False)
    qtbot.addWidget(w)
    w.resize(1366, 768)
    w.show()
    w.activateWindow()
    w.open_recording_file(rec, origin=str(paths.gap_free), result=result, conditions=paths.conditions)
    assert w.settle(120_000)
    return w


def _press(window, key, modifiers=QtCore.Qt.NoModifier):
    QTest.keyClick(window, key, modifiers)
    window.wait_idle()


def _needing_a_look(beats) -> np.ndarray:
    """Rows waiting for review, or flagged (a flag other than the structural first/last-beat
    ones) with no verdict of the user's, in time order: worked out here from the table."""
    flags = [set(str(f).split(";")) - {"", "no_diastole", "truncated"} for f in beats["flags"]]
    want = (np.asarray(beats["verdict"]) == "to_review") | (
        np.array([bool(f) for f in flags]) & (np.asarray(beats["reviewed"]) == 0))
    order = np.lexsort((np.asarray(beats["t_upstroke_s"]), np.asarray(beats["sweep"])))
    return order[want[order]]


def test_shift_n_and_shift_p_walk_the_beats_that_need_a_look(demo):
    beats = demo.session.beats(demo.key)
    wanted = _needing_a_look(beats)
    assert wanted.size >= 3  # the demo plants seal trouble and noise (sample_data/README.md)
    demo.select_beat(0)
    _press(demo, QtCore.Qt.Key_N, QtCore.Qt.ShiftModifier)
    assert demo.current_row == wanted[0]
    _press(demo, QtCore.Qt.Key_N, QtCore.Qt.ShiftModifier)
    assert demo.current_row == wanted[1]
    _press(demo, QtCore.Qt.Key_P, QtCore.Qt.ShiftModifier)
    assert demo.current_row == wanted[0]
    # Once accepted it needs no look: the next Shift+N goes past it, and so does U.
    _press(demo, QtCore.Qt.Key_A)
    after = demo.session.beats(demo.key)
    assert after["verdict"][wanted[0]] == "accepted" and after["decided_by"][wanted[0]] == "user"
    demo.select_beat(int(wanted[0]))
    _press(demo, QtCore.Qt.Key_N, QtCore.Qt.ShiftModifier)
    assert demo.current_row == wanted[1]
    demo.select_beat(0)
    _press(demo, QtCore.Qt.Key_U)
    assert demo.current_row == 1  # beat 0 has no verdict either, but U goes past the one under review


def test_the_table_filter_lists_the_beats_waiting_and_a_verdict_moves_no_row(demo):
    beats = demo.session.beats(demo.key)
    waiting = np.flatnonzero(np.asarray(beats["verdict"]) == "to_review")
    demo.table_filter.choose("to_review")
    model = demo.table.beat_model
    assert np.array_equal(np.sort(model.shown_rows()), waiting)
    demo.select_beat(int(waiting[0]))
    demo.accept_current()
    demo.wait_idle()
    assert np.array_equal(np.sort(model.shown_rows()), waiting)  # the row stays where it was
    assert model.data(model.index(model.view_row(int(waiting[0])), model.column_names().index("accepted"))) == "✓"
    demo.table_filter.choose("to_review")  # choosing again lists what waits now
    assert np.array_equal(np.sort(model.shown_rows()), waiting[1:])
    demo.table_filter.choose("noisy")
    noisy = [i for i, f in enumerate(beats["flags"]) if "noisy" in str(f).split(";")]
    assert np.array_equal(np.sort(model.shown_rows()), noisy)


def test_a_verdicts_quick_summary_is_the_cores_full_summary(demo):
    beats = demo.session.beats(demo.key)
    waiting = np.flatnonzero(np.asarray(beats["verdict"]) == "to_review")
    row = int(waiting[-1])
    name = str(beats["condition"][row])
    demo.select_beat(row)
    demo.reject_current("noise")
    demo.wait_idle()  # the key's own work, not the pause after it
    quick = {str(s.values["condition"]): s.values for s in demo.state.summaries}[name]
    assert demo.settle(120_000)
    full = {str(s.values["condition"]): s.values for s in demo.session.cached_summaries(demo.key)}[name]
    # analysis.stats.summarize over the whole reviewed table is the reference
    for col in ("n_beats", "n_in_window", "n_used", "n_rejected", "n_to_review"):
        assert quick[col] == full[col], col
    for col in ("mdp_mean_mV", "cl_mean_ms", "apd90_sd_ms", "cl_rmssd_ms"):
        assert quick[col] == pytest.approx(full[col], rel=1e-12, nan_ok=True), col


def test_the_beat_is_drawn_over_its_conditions_mean(demo):
    beats = demo.beats
    row = demo.current_row
    drawn = demo.beat_card.overlay.drawn()
    t_ms, v = drawn["beat"]
    assert t_ms.size and drawn["mean"][0].size
    rec = demo.recording
    fs = rec.sampling_rate_hz
    i_up = int(beats["i_upstroke"][row])
    k = int(np.argmin(np.abs(t_ms)))  # the sample at the upstroke
    raw = rec.sweep(int(beats["sweep"][row]))
    # the trace sample at the upstroke, less the LJP the analysis subtracted (pyabf-read samples)
    assert v[k] == pytest.approx(raw[i_up + int(round(t_ms[k] * fs / 1e3))] - demo.state.ljp_mV(), abs=1e-9)


def test_dvdt_under_the_trace_is_a_savitzky_golay_derivative(demo):
    from scipy.signal import savgol_filter

    from analysis.signal import window_samples
    from app.gui.views.derivative_strip import WINDOW_MS

    strip = demo.dvdt_strip
    t, dvdt = strip.drawn()
    assert t.size
    fs = demo.recording.sampling_rate_hz
    a = int(round(t[0] * fs))
    v = demo.recording.sweep(demo.sweep)[a:a + t.size]
    n = window_samples(WINDOW_MS, fs)
    ref = savgol_filter(v, n, 2, deriv=1, delta=1.0 / fs) / 1e3  # scipy reference, mV/s to V/s
    inner = slice(n, t.size - n)
    assert np.allclose(dvdt[inner], ref[inner], rtol=1e-9, atol=1e-9)
    # the same time axis as the trace view
    assert strip.getPlotItem().getViewBox().viewRange()[0] == pytest.approx(demo.trace_view.x_range())


def test_the_window_at_1366_by_768(demo, tmp_path):
    from app.gui.window.launch import prepare_screenshot_view

    prepare_screenshot_view(demo)
    demo.settle()
    path = demo.render_png(tmp_path / "small.png", size=(1366, 768))
    assert path.endswith("small.png")
    tabs = demo.figures.tabs.tabBar()
    assert all(tabs.tabRect(i).right() <= tabs.width() for i in range(tabs.count()))  # every tab reachable
    assert not demo.summary_panel.verticalScrollBar().isVisible()
    assert not demo.summary_panel.horizontalScrollBar().isVisible()
    readout = demo.trace_view.gate_line.sceneBoundingRect()
    assert demo.trace_view.readout_line()
    assert not readout.intersects(demo.trace_view.legend.sceneBoundingRect())
