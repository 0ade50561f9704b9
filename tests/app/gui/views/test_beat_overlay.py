"""The beat card's overlay: one beat over its condition's mean, drawn in one paint per beat."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("pytestqt")

import pyqtgraph as pg  # noqa: E402
from PySide6 import QtCore, QtWidgets  # noqa: E402

from app.gui.views.beat_overlay import Y_STEP_MV, BeatOverlay  # noqa: E402


def _beat(shift_ms: float, t_ms: np.ndarray) -> np.ndarray:
    # An invented action-potential-like bump (demo-style data), -60 mV at rest; its height
    # differs from beat to beat, so each beat gives the plot a new range.
    return -60.0 + (80.0 + shift_ms) * np.exp(-(((t_ms - shift_ms) / 100.0) ** 2))


def test_each_new_beat_fits_the_plot_and_paints_it_once(qtbot, monkeypatch):
    w = BeatOverlay()
    qtbot.addWidget(w)
    w.resize(300, 160)
    w.show()
    qtbot.waitExposed(w)
    painted = []
    original = pg.GraphicsView.paintEvent

    def counting(view, event):
        painted.append(view)
        original(view, event)

    monkeypatch.setattr(pg.GraphicsView, "paintEvent", counting)
    t = np.linspace(-250.0, 500.0, 7501)
    for k, shift in enumerate((0.0, 12.0, -7.0, 30.0)):
        painted.clear()
        beat = _beat(shift, t)
        w.draw((t, beat), (t, 0.9 * beat), "mean of 12")
        for _ in range(3):  # as many event-loop passes as a second paint would need
            QtWidgets.QApplication.processEvents()
            QtCore.QThread.msleep(10)
        # One change, one repaint (common practice, no source): the range is applied before
        # the paint, so the items do not move while they are painted.
        assert painted.count(w) == 1, k
        (x0, x1), (y0, y1) = w.getPlotItem().getViewBox().viewRange()
        assert (x0, x1) == pytest.approx((-250.0 - 15.0, 500.0 + 15.0))  # 2 % of 750 ms each side
        # Potential: 6 % of the span each side, rounded out to whole 5 mV steps (by hand:
        # -60 mV and 0.9 * -60 = -54 mV at rest, 80 + shift above).
        lo, hi = -60.0, -60.0 + 80.0 + shift
        pad = 0.06 * (hi - lo)
        assert (y0, y1) == pytest.approx((Y_STEP_MV * np.floor((lo - pad) / Y_STEP_MV),
                                          Y_STEP_MV * np.ceil((hi + pad) / Y_STEP_MV)))
        assert y0 % Y_STEP_MV == 0 and y1 % Y_STEP_MV == 0
    assert w.drawn()["beat"][1] == pytest.approx(_beat(30.0, t))
