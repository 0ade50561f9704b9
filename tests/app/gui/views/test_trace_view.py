"""The trace view draws each beat's markers where the table puts them, and rejected beats apart."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from PySide6 import QtCore  # noqa: E402

from app.gui.views.trace_data import SweepLevels  # noqa: E402
from app.gui.views.trace_view import TraceView  # noqa: E402

from ..handmade import handmade  # noqa: E402


@pytest.fixture
def view(qtbot):
    w = TraceView()
    qtbot.addWidget(w)
    w.resize(1000, 400)
    w.show()
    return w


def test_markers_equal_the_table_for_the_sweep_shown(view):
    rec, beats = handmade()
    view.set_sweep(SweepLevels(rec, 1, 0))
    view.set_beats(beats)
    drawn = view.drawn_markers()
    rows = np.flatnonzero(beats["sweep"] == 1)
    assert np.array_equal(view.sweep_rows(), rows)
    # MDP and peak markers are the table's values (hand-built table)
    t, v, r = drawn["mdp"]
    keep = np.isfinite(beats["t_mdp_s"][rows])
    assert np.array_equal(r, rows[keep])
    assert np.array_equal(t, beats["t_mdp_s"][rows][keep]) and np.array_equal(v, beats["mdp_mV"][rows][keep])
    t, v, _ = drawn["apd90"]
    ok = np.isfinite(beats["apa_mV"][rows])
    assert np.allclose(v, (beats["peak_mV"] - 0.9 * beats["apa_mV"])[rows][ok])  # 90 % repolarised, MEASUREMENTS.md
    # the upstroke marker sits on the trace sample at i_upstroke
    t, v, r = drawn["upstroke"]
    assert np.array_equal(v, rec.sweep(1)[beats["i_upstroke"][r]])


def test_rejected_beat_is_drawn_apart_with_its_reason(view):
    rec, beats = handmade(n_sweeps=1)
    accepted = beats["accepted"].copy()
    reason = beats["reject_reason"].copy()
    accepted[3], reason[3] = 0, "seal trouble"
    beats = beats.with_columns(accepted=accepted, reject_reason=reason)
    view.set_sweep(SweepLevels(rec, 0, 0))
    view.set_beats(beats)
    for kind, (_t, _v, rows) in view.drawn_markers().items():
        assert 3 not in rows, kind
    assert len(view.rejected_markers.data) == 1
    assert view.reject_bands._labels == ["✕ seal trouble"]
    t_up = beats["t_upstroke_s"][3]
    assert view.reject_bands.band_at(t_up) == 0
    assert "REJECTED: seal trouble" in view.describe_beat(3)
    assert view.beat_at(t_up + 0.01) == 3


def test_current_beat_is_scrolled_into_view_and_phases_toggle(view):
    rec, beats = handmade(n_sweeps=1, seconds=30.0)
    view.set_sweep(SweepLevels(rec, 0, 0), window_s=4.0)
    view.set_beats(beats)
    far = int(np.argmax(beats["t_upstroke_s"] > 20.0))
    view.set_current_beat(far)
    x0, x1 = view.x_range()
    assert x0 < beats["t_upstroke_s"][far] < x1 and x1 - x0 == pytest.approx(4.0)
    assert not view.phases_visible()
    view.set_phases_visible(True)
    assert view.phases_visible() and len(view.phase_bands) > 0


def test_cursor_drag_end_emits_both_times(view, qtbot):
    rec, beats = handmade(n_sweeps=1)
    view.set_sweep(SweepLevels(rec, 0, 0))
    view.set_cursors_visible(True)
    with qtbot.waitSignal(view.cursors_finished) as sig:
        view.set_cursor_times(2.5, 1.25)
    assert sig.args == [1.25, 2.5]


def test_view_menu_toggles_phases_and_cursors(view, qtbot):
    rec, beats = handmade(n_sweeps=1)
    view.set_sweep(SweepLevels(rec, 0, 0))
    menu = view.view_menu()
    phases, cursors = menu.actions()[0], menu.actions()[1]
    with qtbot.waitSignal(view.phases_toggled) as sig:
        phases.trigger()
    assert sig.args == [True]
    with qtbot.waitSignal(view.cursors_toggled) as sig:
        cursors.trigger()
    assert sig.args == [True]


def test_markers_hide_when_too_many_beats_are_in_view(view, monkeypatch):
    import app.gui.views.trace_view as tv

    monkeypatch.setattr(tv, "MAX_DETAILED_BEATS", 4)
    rec, beats = handmade(n_sweeps=1, seconds=8.0)
    view.set_sweep(SweepLevels(rec, 0, 0))
    view.set_beats(beats)
    view.set_phases_visible(True)
    view.show_span(0.0, 8.0)
    assert view.beats_in_view() == 9 and not view.markers["peak"].isVisible()  # upstrokes 0.5 s + k 0.8 s < 8 s
    assert not view.phase_bands.isVisible() and view.phases_visible()  # still switched on
    view.show_span(1.0, 3.0)
    assert view.markers["peak"].isVisible() and view.phase_bands.isVisible()


def _flagged_view(view, qtbot, row: int):
    rec, beats = handmade(n_sweeps=1)
    flags = beats["flags"].copy()
    flags[row] = "noisy;mdp_drift"
    view.set_sweep(SweepLevels(rec, 0, 0))
    view.set_beats(beats.with_columns(flags=flags))
    qtbot.waitExposed(view)
    return beats


def _scene_x(view, t_s: float) -> float:
    return view.flag_bands.mapToScene(QtCore.QPointF(t_s, 0.0)).x()


@pytest.mark.parametrize("edge", ["left", "right"])
def test_a_flag_label_at_the_views_edge_is_shifted_inward_and_stays_over_its_beat(view, qtbot, edge):
    beats = _flagged_view(view, qtbot, 3)
    t_up = beats["t_upstroke_s"][3]
    band = (beats["t_mdp_s"][3], beats["t_apd90_s"][3])  # the flag band spans MDP to APD90
    centre = (band[0] + band[1]) / 2
    # The edge cuts through the band between its centre and its end, so a label centred on the
    # band would begin outside the view.
    if edge == "left":
        view.show_span(centre + 0.05, centre + 3.05)
    else:
        view.show_span(centre - 3.05, centre - 0.05)
    qtbot.waitUntil(lambda: len(view.flag_bands.label_rects()) == 1)
    [(text, rect)] = view.flag_bands.label_rects()
    assert text == "⚑ noisy, mdp_drift"  # both words, in the table's order
    half = rect.width() / 2
    if edge == "left":
        assert _scene_x(view, centre) - half < view.vb.sceneBoundingRect().left()  # centred: cut off
    else:
        assert _scene_x(view, centre) + half > view.vb.sceneBoundingRect().right()
    assert view.vb.sceneBoundingRect().contains(rect)  # whole, inside the view
    lo, hi = sorted((_scene_x(view, band[0]), _scene_x(view, band[1])))
    # It starts (at the left edge) or ends (at the right) over its own beat's band.
    inner = rect.left() + 1 if edge == "left" else rect.right() - 1
    assert lo <= inner <= hi
    assert view.beat_at(view.vb.mapSceneToView(QtCore.QPointF(inner, rect.center().y())).x()) == 3
    assert band[0] < t_up < band[1]


def test_flag_labels_away_from_the_edges_stay_centred_on_their_band(view, qtbot):
    beats = _flagged_view(view, qtbot, 3)
    view.show_span(0.5, 4.5)
    qtbot.waitUntil(lambda: len(view.flag_bands.label_rects()) == 1)
    [(_text, rect)] = view.flag_bands.label_rects()
    centre = (beats["t_mdp_s"][3] + beats["t_apd90_s"][3]) / 2
    assert rect.center().x() == pytest.approx(_scene_x(view, centre), abs=0.5)  # centred, to half a pixel


def test_a_shifted_flag_label_gives_way_to_its_neighbours(view, qtbot):
    rec, beats = handmade(n_sweeps=1)
    flags = beats["flags"].copy()
    flags[3] = flags[4] = "noisy;mdp_drift"
    view.set_sweep(SweepLevels(rec, 0, 0))
    view.set_beats(beats.with_columns(flags=flags))
    qtbot.waitExposed(view)
    # Beat 3's band runs past the left edge; shifted to the edge, its label would cover beat 4's.
    view.show_span(beats["t_apd90_s"][3] - 0.09, beats["t_apd90_s"][3] + 3.91)
    qtbot.waitUntil(lambda: len(view.flag_bands.label_rects()) == 1)
    [(_text, rect)] = view.flag_bands.label_rects()
    centre4 = (beats["t_mdp_s"][4] + beats["t_apd90_s"][4]) / 2
    assert rect.center().x() == pytest.approx(_scene_x(view, centre4), abs=0.5)  # beat 4's, centred


def test_span_bands_give_their_spans_and_brushes(qapp):
    """The bands an exporter draws are exactly those set (common practice, no source)."""
    from app.gui.views.bands import SpanBands

    bands = SpanBands()
    red, blue = (200, 40, 40, 60), (40, 40, 200, 60)
    bands.set_bands([0.0, 2.5], [1.0, 4.0], [red, blue])
    got = bands.spans()
    assert [(a, b) for a, b, _ in got] == [(0.0, 1.0), (2.5, 4.0)]
    assert [brush.color().getRgb() for _, _, brush in got] == [red, blue]
