"""Phase shading on the trace: only where a phase is defined, every band named, phase 4 from the
MDP marker (phase numbering of the cardiac action potential: common practice, no source)."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from analysis import analyze  # noqa: E402
from analysis.synthetic import preset, synthesize  # noqa: E402
from app.gui.views.trace_data import SweepLevels  # noqa: E402
from app.gui.views.trace_view import TraceView  # noqa: E402

FS = 10_000.0


@pytest.fixture(scope="module")
def cell():
    syn = synthesize(preset("nodal-like"), duration_s=8.0, fs_hz=FS, seed=11, noise_mV=0.2)
    return syn.recording, analyze(syn.recording).beats


@pytest.fixture
def view(qtbot):
    w = TraceView()
    qtbot.addWidget(w)
    w.resize(1200, 420)
    w.show()
    return w


def _bands(view):
    b = view.phase_bands
    return np.asarray(b._t0), np.asarray(b._t1), list(b._labels)


def _show(view, rec, beats, qtbot):
    view.set_sweep(SweepLevels(rec, 0, 0), window_s=3.0)
    view.set_beats(beats)
    view.show_span(2.0, 5.0)
    view.set_phases_visible(True)
    qtbot.wait(50)


def test_every_phase_band_in_view_is_labelled_and_phase_4_starts_at_the_mdp_marker(view, cell, qtbot, tmp_path):
    rec, beats = cell
    _show(view, rec, beats, qtbot)
    t0, t1, labels = _bands(view)
    assert set(labels) == {"4", "0", "3"}  # nodal-like: no plateau, so no 1 or 2
    x0, x1 = view.x_range()
    inside = np.flatnonzero((t0 >= x0) & (t1 <= x1))
    assert inside.size >= 9  # three beats' 4, 0 and 3 in a 3 s view of a ~0.8 s cycle
    drawn = view.phase_bands.label_rects()
    # Each band wholly in view has its number drawn, the millisecond-wide phase 0 too; the
    # labels never cover one another.
    assert sorted(text for text, _r in drawn).count("0") >= sum(labels[i] == "0" for i in inside)
    assert len(drawn) >= inside.size
    rects = [r for _t, r in drawn]
    assert not any(a.intersects(b) for k, a in enumerate(rects) for b in rects[k + 1:])
    # Phase 4 starts at the MDP marker drawn, and phase 3 of the beat before ends there.
    t_mdp, _v, _rows = view.drawn_markers()["mdp"]
    starts = t0[np.array([lab == "4" for lab in labels])]
    in_view = t_mdp[(t_mdp > x0) & (t_mdp < x1)]
    assert in_view.size >= 3 and np.isin(in_view, starts).all()
    ends = t1[np.array([lab == "3" for lab in labels])]
    assert np.isin(starts, ends).sum() >= starts.size - 1
    view.grab().save(str(tmp_path / "phases.png"))


def test_a_beat_without_apd90_gets_no_phase_3_band(view, cell, qtbot, tmp_path):
    rec, beats = cell
    rows = np.flatnonzero((beats["t_upstroke_s"] > 2.5) & (beats["t_upstroke_s"] < 4.5))
    r = int(rows[0])
    t90 = np.asarray(beats["t_apd90_s"], float).copy()
    t90[r] = np.nan  # as a beat whose repolarisation is not known (cut by the sweep's end)
    _show(view, rec, beats.with_columns(t_apd90_s=t90), qtbot)
    t0, t1, labels = _bands(view)
    peak, nxt_mdp = float(beats["t_peak_s"][r]), float(beats["t_mdp_s"][r + 1])
    # Nothing is shaded from its peak to the next beat's MDP; its phases 4 and 0 remain.
    covered = (t0 < nxt_mdp - 1e-6) & (t1 > peak + 1e-6)
    assert not covered.any()
    assert np.any((np.asarray(labels) == "0") & np.isclose(t1, peak))
    assert np.any((np.asarray(labels) == "4") & np.isclose(t0, float(beats["t_mdp_s"][r])))
    view.grab().save(str(tmp_path / "no_apd90.png"))
