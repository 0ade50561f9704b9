"""The whole-recording strip: navigation window, condition bands, rate points."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from PySide6 import QtGui  # noqa: E402

from app.gui import palette  # noqa: E402
from app.gui.views.overview import OverviewStrip  # noqa: E402


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
    assert [label.textItem.toPlainText() for label in strip.condition_labels] == ["baseline", "drug"]
    assert bands._t1.tolist() == [60.0, 180.0]  # an open end stops at the recording's end
    assert strip.steady_bands[0].band_at(45.0) == 0


def test_rate_points_split_accepted_and_rejected(qtbot):
    strip = OverviewStrip()
    qtbot.addWidget(strip)
    strip.set_recording_geometry([0.0], [10.0])
    strip.set_rate(np.array([1.0, 2.0, 3.0]), np.array([np.nan, 70.0, 72.0]), np.array([1, 1, 0]))
    assert len(strip.rate.data) == 1 and len(strip.rate_rejected.data) == 1


@pytest.fixture
def labelled(qtbot):
    """A strip on screen over a dense spike train, with a wide, a long-named and a narrow condition."""
    strip = OverviewStrip()
    qtbot.addWidget(strip)
    strip.resize(900, 150)
    strip.show()
    qtbot.waitExposed(strip)
    strip.set_recording_geometry([0.0], [180.0])
    t = np.linspace(0.0, 180.0, 4000)
    strip.set_envelope(t, np.where(np.arange(t.size) % 2 == 0, -60.0, 20.0))  # spikes all the way up
    strip.set_conditions([("baseline", 0.0, 60.0, "#3a86ff"), ("UP-113 1 uM", 60.0, 120.0, "#ef476f"),
                          ("washout", 120.0, 178.0, "#06a77d"), ("puff", 178.0, np.inf, "#8338ec")])
    return strip


def _scene_rect(item):
    return item.mapRectToScene(item.boundingRect())


def test_condition_labels_sit_on_a_paper_ground_inside_their_band_and_the_strip(labelled):
    strip = labelled
    box = strip.trace_box.sceneBoundingRect()
    shown = [label for label in strip.condition_labels if label.isVisible()]
    assert [label.textItem.toPlainText() for label in shown] == ["baseline", "UP-113 1 uM", "washout"]
    for label, (a, b) in zip(shown, [(0.0, 60.0), (60.0, 120.0), (120.0, 178.0)]):
        rect = _scene_rect(label)
        left, right = (strip.trace_box.mapViewToScene(QtGui.QVector2D(x, 0).toPointF()).x() for x in (a, b))
        assert box.contains(rect)  # inside the strip
        assert left <= rect.left() and rect.right() <= right  # inside its band
        assert 0 < label.fill.color().alpha() < 255  # semi-opaque: the trace shows faintly through
        assert label.fill.color().name() == palette.PAPER
        assert label.border.color().name() == {"baseline": "#3a86ff", "UP-113 1 uM": "#ef476f", "washout": "#06a77d"}[
            label.textItem.toPlainText()]
    # 2 s at 900 px is some 9 px, too narrow for its name: hidden rather than spilling over
    assert not strip.condition_labels[3].isVisible()


def test_a_label_follows_the_strip_and_hides_when_its_band_gets_too_narrow(labelled, qtbot):
    strip = labelled
    strip.resize(260, 150)
    qtbot.waitUntil(lambda: not strip.condition_labels[1].isVisible())  # 60 s at ~190 px: too narrow
    strip.resize(1200, 150)
    qtbot.waitUntil(lambda: strip.condition_labels[1].isVisible())
    assert strip.trace_box.sceneBoundingRect().contains(_scene_rect(strip.condition_labels[1]))


def _light_fraction(image: QtGui.QImage, rect) -> float:
    """Share of pixels in ``rect`` lighter than the envelope colour (the label's ground)."""
    ink = QtGui.QColor(palette.ENVELOPE).lightness()
    values = [QtGui.QColor(image.pixel(x, y)).lightness()
              for x in range(rect.left(), rect.right()) for y in range(rect.top(), rect.bottom())]
    return float(np.mean(np.asarray(values) > (ink + 255) / 2))


def test_the_label_ground_hides_the_spikes_behind_the_text(labelled):
    strip = labelled
    label = strip.condition_labels[0]
    rect = strip.mapFromScene(_scene_rect(label)).boundingRect()
    with_label = _light_fraction(strip.grab().toImage(), rect.adjusted(2, 2, -2, -2))
    label.setVisible(False)
    without = _light_fraction(strip.grab().toImage(), rect.adjusted(2, 2, -2, -2))
    # Measured on the rendering itself (common practice, no source): the spikes fill the bare
    # patch, the label's ground covers all but its letters.
    assert without < 0.5 < with_label
