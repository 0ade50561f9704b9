"""The main window over the core: open, review from the keyboard, undo, cursors, settings, save."""

from __future__ import annotations

import json

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from PySide6 import QtCore, QtGui  # noqa: E402

from analysis import open_recording  # noqa: E402
from analysis.conditions import Condition, SteadyState  # noqa: E402
from analysis.pipeline import analyze  # noqa: E402
from analysis.synthetic import preset, synthesize  # noqa: E402
from app.gui.window.main_window import MainWindow  # noqa: E402
from app.gui.window.recent import config_dir  # noqa: E402


def _window(qtbot):
    w = MainWindow(interactive=False)
    qtbot.addWidget(w)
    w.resize(1400, 900)
    w.show()
    return w


@pytest.fixture
def window(cell_window):
    """The window on the file, given the module's analysis (the first test analyses itself)."""
    w = cell_window(size=(1400, 900))
    assert w.key is not None and not w.last_error
    return w


def test_opening_draws_the_cores_beats(qtbot, cell_abf):
    window = _window(qtbot)
    assert window.open_path(cell_abf)  # the real path: header, first paint, analysis in a worker
    assert window.settle(60_000) and window.key is not None and not window.last_error
    core = analyze(open_recording(cell_abf)).beats  # the core's own analysis of the same file
    shown = window.session.beats(window.key)
    assert len(shown) == len(core) > 10
    rows = np.flatnonzero((core["sweep"] == 0) & (core["accepted"] == 1))
    drawn = window.trace_view.drawn_markers()
    for kind, t_col, v_col in (("mdp", "t_mdp_s", "mdp_mV"), ("peak", "t_peak_s", "peak_mV"), ("top", "t_top_s", "top_mV")):
        ok = np.isfinite(core[t_col][rows])
        t, v, r = drawn[kind]
        assert np.array_equal(r, rows[ok]), kind
        assert np.allclose(t, core[t_col][rows][ok]) and np.allclose(v, core[v_col][rows][ok]), kind
    t, _v, _r = drawn["upstroke"]
    assert np.allclose(t, core["t_upstroke_s"][rows])
    assert window.table.beat_model.rowCount() == len(core)
    # the recent-files list remembers it, under the private config folder
    assert str(cell_abf) in json.loads((config_dir() / "recent.json").read_text())


def test_keyboard_reject_updates_table_and_session_and_undo_restores_both(window, qtbot):
    window.select_beat(3)
    qtbot.keyClick(window, QtCore.Qt.Key_R)
    picker = window.reason_picker
    assert picker.isVisible()
    reason_action = picker.reason_actions()[1]
    reason = reason_action.data()
    reason_action.trigger()
    beats = window.session.beats(window.key)
    assert beats["accepted"][3] == 0 and beats["reject_reason"][3] == reason
    model = window.table.beat_model
    kept = model.column_names().index("accepted")
    assert model.data(model.index(model.view_row(3), kept)) == "✕"
    assert window.current_row == 4  # moved on to the next beat
    qtbot.keySequence(window, QtGui.QKeySequence.StandardKey.Undo)
    beats = window.session.beats(window.key)
    assert beats["accepted"][3] == 1 and beats["reject_reason"][3] == ""
    assert model.data(model.index(model.view_row(3), kept)) == "✓"
    qtbot.keySequence(window, QtGui.QKeySequence.StandardKey.Redo)
    assert window.session.beats(window.key)["accepted"][3] == 0


def test_keyboard_navigation_accept_and_region_reject(window, qtbot):
    window.select_beat(2)
    qtbot.keyClick(window, QtCore.Qt.Key_N)
    assert window.current_row == 3
    qtbot.keyClick(window, QtCore.Qt.Key_P)
    assert window.current_row == 2
    qtbot.keyClick(window, QtCore.Qt.Key_A)
    beats = window.session.beats(window.key)
    assert beats["accepted"][2] == 1 and beats["reviewed"][2] == 1
    qtbot.keyClick(window, QtCore.Qt.Key_PageDown)
    assert window.sweep == 1
    window.set_cursors_visible(True)
    ups = beats["t_upstroke_s"][beats["sweep"] == 1]
    window.trace_view.set_cursor_times(ups[1] - 0.01, ups[3] + 0.01)
    assert window.reject_region("seal or access trouble") == 3
    beats = window.session.beats(window.key)
    rows = np.flatnonzero(beats["sweep"] == 1)[1:4]
    assert (beats["accepted"][rows] == 0).all()
    window.undo()  # the region was one step
    assert (window.session.beats(window.key)["accepted"][rows] == 1).all()


def test_cursor_readout_equals_numpy_over_the_same_samples(window, cell_abf):
    window.set_cursors_visible(True)
    t0, t1 = 1.2345, 3.3333
    window.trace_view.set_cursor_times(t1, t0)  # emits as a finished drag does
    fs = window.recording.sampling_rate_hz
    v = open_recording(cell_abf).sweep(0)[int(np.ceil(t0 * fs)) : int(np.floor(t1 * fs)) + 1]
    r = window.last_readout
    assert r.mean_value == pytest.approx(np.mean(v))  # numpy reference
    assert (r.min_value, r.max_value) == (np.min(v), np.max(v))  # numpy reference
    assert r.delta_value == pytest.approx(v[-1] - v[0])  # numpy reference
    assert window.cursor_panel.value_text("mean_value") == f"{np.mean(v):.2f}"
    assert "gated 2098.8 ms" in window.trace_view.readout_line()  # 3.3333 s - 1.2345 s


def test_changing_a_setting_reanalyses(window, qtbot):
    before = window.session.beats(window.key)
    form = window.settings_form
    form.editors["preprocess.ljp_mV"].set(10.0)
    form.apply()
    assert window.wait_idle(60_000)
    after = window.session.beats(window.key)
    assert window.session.settings(window.key).preprocess.ljp_mV == 10.0
    assert len(after) == len(before)
    # V_true = V_measured - LJP (Barry & Lynch 1991, J Membr Biol 121:101)
    assert np.allclose(after["mdp_mV"], before["mdp_mV"] - 10.0, equal_nan=True, atol=1e-9)
    drawn = window.trace_view.drawn_markers()["mdp"]
    assert np.allclose(drawn[1], after["mdp_mV"][drawn[2]])
    assert window.trace_view.curve.pos().y() == -10.0  # the trace is drawn corrected too
    qtbot.keySequence(window, QtGui.QKeySequence.StandardKey.Undo)  # a settings change is one step
    assert window.session.settings(window.key).preprocess.ljp_mV == 0.0
    assert form.values()["preprocess.ljp_mV"] == 0.0 and window.trace_view.curve.pos().y() == 0.0


def test_save_then_reopen_restores_decisions_conditions_and_settings(window, qtbot, tmp_path):
    window.select_beat(5)
    window.reject_current("electrical artefact")
    cond = Condition("baseline", 0.0, 8.0, "s", SteadyState("last_s", 5.0))
    assert window.add_condition(cond)
    window.settings_form.editors["measurement.top_dvdt_V_per_s"].set(1.0)
    window.settings_form.apply()
    assert window.wait_idle(60_000)
    out = tmp_path / "review.h5"
    assert window.save_results(out)
    assert not window.session.modified and not window.journal.exists()

    again = MainWindow(interactive=False)
    qtbot.addWidget(again)
    assert again.open_path(out)
    again.wait_idle(60_000)
    beats = again.session.beats(again.key)
    assert beats["accepted"][5] == 0 and beats["reject_reason"][5] == "electrical artefact"
    assert again.session.conditions(again.key) == (cond,)
    assert again.session.settings(again.key).measurement.top_dvdt_V_per_s == 1.0
    assert again.settings_form.settings == again.session.settings(again.key)
    assert again.conditions_panel.list.count() == 1
    assert again.table.beat_model.table.equals(beats)


def test_autosave_brings_back_an_unsaved_review(window, qtbot, cell_abf):
    window.select_beat(4)
    window.reject_current("noise")
    window.add_condition(Condition("drug", 12.0, 16.0))
    assert window.journal.exists()  # written at once, not at exit
    # a crash: the window goes without saving; the same file opened again
    again = MainWindow(interactive=False)
    qtbot.addWidget(again)
    again.open_path(cell_abf)
    assert again.wait_idle(60_000)
    beats = again.session.beats(again.key)
    assert beats["accepted"][4] == 0 and beats["reject_reason"][4] == "noise"
    assert [c.name for c in again.session.conditions(again.key)] == ["drug"]
    assert "restored" in again.statusBar().currentMessage()


def test_drop_opens_the_file_and_channels_are_listed(qtbot, cell_abf):
    w = MainWindow(interactive=False)
    qtbot.addWidget(w)
    mime = QtCore.QMimeData()
    mime.setUrls([QtCore.QUrl.fromLocalFile(str(cell_abf))])
    event = QtGui.QDropEvent(QtCore.QPointF(10, 10), QtCore.Qt.CopyAction, mime, QtCore.Qt.LeftButton, QtCore.Qt.NoModifier)
    w.dropEvent(event)
    assert w.wait_idle(60_000)
    assert w.key is not None and w.channel_combo.count() == 1
    assert w.sweep_spin.maximum() == 2


def test_bad_file_is_one_line_and_nothing_changes(qtbot, tmp_path):
    w = MainWindow(interactive=False)
    qtbot.addWidget(w)
    bad = tmp_path / "broken.abf"
    bad.write_bytes(b"ABF2" + b"\0" * 40)
    assert not w.open_path(bad)
    assert str(bad) in w.last_error and "\n" not in w.last_error
    assert w.key is None


def test_channel_selector_shows_a_command_channel_without_beats(qtbot):
    from analysis.recording import Recording

    syn = synthesize(preset("nodal-like"), duration_s=6.0, fs_hz=2_000.0, seed=4)
    v = syn.recording.sweep(0)
    rec = Recording.from_array(np.stack([v[np.newaxis], np.zeros_like(v)[np.newaxis]]), 2_000.0,
                               units=["mV", "pA"], channel_names=["Vm", "Icmd"])
    w = _window(qtbot)
    w.open_recording_file(rec, label="cell-c2")
    assert w.settle(60_000) and w.key is not None
    assert [w.channel_combo.itemText(i) for i in range(2)] == ["Vm [mV]", "Icmd [pA]"]
    n_peaks = len(w.trace_view.drawn_markers()["peak"][0])
    assert n_peaks > 3
    w.change_channel(1)
    assert w.beats is None and len(w.trace_view.drawn_markers().get("peak", ((),))[0]) == 0
    assert "not a membrane potential" in w.statusBar().currentMessage()
    w.accept_current()  # nothing to review on this channel: no decision is made
    assert not w.session.can_undo
    w.change_channel(0)  # the analysed channel: its beats come back without a new analysis
    assert len(w.trace_view.drawn_markers()["peak"][0]) == n_peaks


def test_file_menu_offers_recent_files_exports_and_batch(window, cell_abf, tmp_path):
    from app.gui.window.files import open_filter

    assert "*.abf" in open_filter() and "*.h5" in open_filter()
    titles = [a.text().replace("&", "") for a in window.menuBar().actions()[0].menu().actions()]
    assert any(t.startswith("Batch-analyse") for t in titles)
    assert any(t.startswith("Export beats CSV") for t in titles)
    window.export_summary_csv(tmp_path / "summary.csv")
    head = (tmp_path / "summary.csv").read_text().splitlines()[0].split(",")
    assert head[:3] == ["file", "sweep_group", "condition"]  # the core's summary CSV columns


def test_settings_applied_during_an_analysis_run_after_it(qtbot, cell_abf):
    w = _window(qtbot)
    assert w.open_path(cell_abf)  # the analysis starts in the background
    w.settings_form.editors["preprocess.ljp_mV"].set(5.0)
    w.settings_form.apply()  # while it runs: noted, not run twice at once
    assert w.settle(60_000)
    assert w.session.settings(w.key).preprocess.ljp_mV == 5.0


def test_table_and_trace_follow_each_other(window):
    rows = np.flatnonzero(window.session.beats(window.key)["sweep"] == 1)
    window.trace_view.beat_clicked.emit(int(rows[2]))  # a click on a beat of the other sweep
    assert window.sweep == 1 and window.table.current_table_row() == rows[2]
    model = window.table.beat_model
    window.table.setCurrentIndex(model.index(model.view_row(int(rows[0])), 3))  # a row picked in the table
    assert window.current_row == rows[0]
    t = window.session.beats(window.key)["t_upstroke_s"][rows[0]]
    x0, x1 = window.trace_view.x_range()
    assert x0 < t < x1
