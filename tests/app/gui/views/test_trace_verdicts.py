"""After a verdict the trace view shows what a full redraw of the new table shows, and an undo
shows again what was there before: the same markers, in the same places and colours, pixel for
pixel on the screen (the view repaints only what a verdict changed and keeps the rest as pixels).
"""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from PySide6 import QtCore, QtGui, QtWidgets

from app.gui.views.trace_data import SweepLevels
from app.gui.views.trace_view import TraceView

from ..handmade import handmade

SIZE = (900, 360)


def _view(qtbot, rec, beats, span, current: int) -> TraceView:
    w = TraceView()
    qtbot.addWidget(w)
    w.resize(*SIZE)
    w.show()
    qtbot.waitExposed(w)
    w.set_sweep(SweepLevels(rec, 0, 0))
    w.set_beats(beats)
    w.show_span(*span)
    w.fit_y()
    w.set_current_beat(current, follow=False)
    _settle()
    return w


def _settle() -> None:
    for _ in range(3):
        QtWidgets.QApplication.processEvents()


def _on_screen(view: TraceView) -> QtGui.QImage:
    """What the screen shows of the view (its window's flushed pixels, not a fresh render)."""
    _settle()
    return view.screen().grabWindow(view.window().winId()).toImage()


def _verdicts(beats, *, rejected=(), to_review=(), reason="seal trouble"):
    """The table with some beats rejected (with a reason) and some waiting for a look, as the
    session's reviewed table gives it (``verdict``, ``accepted``, ``reject_reason``)."""
    n = len(beats)
    verdict = np.full(n, "accepted", dtype=object)
    accepted = np.ones(n, dtype=np.int64)
    reasons = np.full(n, "", dtype=object)
    for r in rejected:
        verdict[r], accepted[r], reasons[r] = "rejected", 0, reason
    for r in to_review:
        verdict[r] = "to_review"
    return beats.with_columns(verdict=verdict, accepted=accepted, reject_reason=reasons)


def _same_pixels(a: QtGui.QImage, b: QtGui.QImage) -> bool:
    return a.size() == b.size() and a.convertToFormat(QtGui.QImage.Format_ARGB32) == b.convertToFormat(
        QtGui.QImage.Format_ARGB32)


def test_verdicts_look_as_a_full_redraw_and_undo_restores_the_view(qtbot):
    rec, beats = handmade(n_sweeps=1, seconds=12.0)
    span = (2.0, 7.0)
    start = _verdicts(beats, rejected=[3, 8], to_review=[5, 6, 7])
    view = _view(qtbot, rec, start, span, current=4)
    before = _on_screen(view)
    before_markers = view.drawn_markers()
    # Review keys, one after another, each on the beat under review: R (reject with a reason)
    # on beat 4, then A (accept) on beat 6, which was waiting for a look; the bands and labels
    # of the beats around stay.
    steps = [
        (_verdicts(beats, rejected=[3, 4, 8], to_review=[5, 6, 7]), 5),
        (_verdicts(beats, rejected=[3, 4, 8], to_review=[5, 7]), 7),
    ]
    for table, current in steps:
        view.set_beats(table)
        view.set_current_beat(current, follow=False)
        fresh = _view(qtbot, rec, table, span, current)
        assert _same_pixels(_on_screen(view), _on_screen(fresh))
        for kind, (t, v, rows) in fresh.drawn_markers().items():
            kept = view.drawn_markers()[kind]
            assert np.array_equal(kept[2], rows), kind
            assert np.allclose(kept[0], t) and np.allclose(kept[1], v), kind
        fresh.close()
    # A rejected beat leaves every marker kind; the band says why (hand-built table: the
    # beat's markers are its columns).
    for kind, (_t, _v, rows) in view.drawn_markers().items():
        assert 4 not in rows, kind
    assert view.reject_bands._labels == ["✕ seal trouble"] * 3
    # Undo, twice: the view as it was, pixel for pixel.
    view.set_beats(_verdicts(beats, rejected=[3, 4, 8], to_review=[5, 6, 7]))
    view.set_current_beat(5, follow=False)
    view.set_beats(start)
    view.set_current_beat(4, follow=False)
    assert _same_pixels(_on_screen(view), before)
    for kind, (t, v, rows) in before_markers.items():
        now = view.drawn_markers()[kind]
        assert np.array_equal(now[2], rows) and np.allclose(now[0], t) and np.allclose(now[1], v), kind


def test_a_verdict_repaints_only_the_beats_it_changed(qtbot):
    rec, beats = handmade(n_sweeps=1, seconds=12.0)
    view = _view(qtbot, rec, _verdicts(beats, rejected=[3, 8]), (2.0, 7.0), current=4)
    painted = []
    real = view.reject_bands.paint

    def paint(painter, option, *args):
        painted.append(QtCore.QRectF(option.exposedRect))
        return real(painter, option, *args)

    view.reject_bands.paint = paint
    view.set_beats(_verdicts(beats, rejected=[3, 6, 8]))
    _settle()
    # The reject bands drew again only around beat 6 (its band and label): beat 3's band, 2.4 s
    # before, was kept as pixels (hand-built beats: upstroke every 0.8 s, band from the MDP 0.5 s
    # before it to APD90 0.138 s after).
    t_up = beats["t_upstroke_s"]
    assert painted
    for rect in painted:
        assert t_up[3] + 0.138 < rect.left() <= t_up[6] - 0.5 and rect.right() >= t_up[6] + 0.138
