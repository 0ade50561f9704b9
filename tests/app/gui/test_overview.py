"""The whole-recording strip: navigation window, condition bands, rate points."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from app.gui.overview import OverviewStrip  # noqa: E402


def test_window_navigates_and_conditions_are_banded(qtbot):
    strip = OverviewStrip()
    qtbot.addWidget(strip)
    strip.set_recording_geometry([0.0], [180.0])
    with qtbot.assertNotEmitted(strip.navigated):
        strip.set_window(10.0, 20.0)  # placing it from the trace view does not echo back
    assert strip.window_span() == (10.0, 20.0)
    with qtbot.waitSignal(strip.navigated) as sig:
        strip.window.setRegion((30.0, 45.0))
    assert sig.args == [30.0, 45.0]
    strip.set_conditions([("baseline", 0.0, 60.0, "#3a86ff"), ("drug", 60.0, np.inf, "#ef476f")],
                         [(30.0, 60.0, "#3a86ff")])
    bands = strip.condition_bands[0]
    assert bands._labels == ["baseline", "drug"]
    assert bands._t1.tolist() == [60.0, 180.0]  # an open end stops at the recording's end
    assert strip.steady_bands[0].band_at(45.0) == 0


def test_rate_points_split_accepted_and_rejected(qtbot):
    strip = OverviewStrip()
    qtbot.addWidget(strip)
    strip.set_recording_geometry([0.0], [10.0])
    strip.set_rate(np.array([1.0, 2.0, 3.0]), np.array([np.nan, 70.0, 72.0]), np.array([1, 1, 0]))
    assert len(strip.rate.data) == 1 and len(strip.rate_rejected.data) == 1
