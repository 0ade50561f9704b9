"""Conditions: a span dragged on the overview becomes a named condition with its steady state."""

from __future__ import annotations

import pytest

pytest.importorskip("pytestqt")

from PySide6 import QtCore  # noqa: E402

from analysis.conditions import ConditionError, SteadyState  # noqa: E402
from app.gui.panels.conditions import ConditionDialog, describe_condition  # noqa: E402
from app.gui.views.overview import OverviewStrip  # noqa: E402


class _Drag:
    """The parts of a pyqtgraph mouse drag event the overview reads."""

    def __init__(self, box, t0, t1, *, finish=True, shift=True):
        self._down = box.mapViewToScene(QtCore.QPointF(t0, 0.0))
        self._now = box.mapViewToScene(QtCore.QPointF(t1, 0.0))
        self._finish, self._shift = finish, shift
        self.accepted = False

    def button(self):
        return QtCore.Qt.LeftButton

    def modifiers(self):
        return QtCore.Qt.ShiftModifier if self._shift else QtCore.Qt.NoModifier

    def buttonDownScenePos(self):  # noqa: N802 (pyqtgraph API)
        return self._down

    def scenePos(self):  # noqa: N802
        return self._now

    def isFinish(self):  # noqa: N802
        return self._finish

    def accept(self):
        self.accepted = True

    def ignore(self):
        self.accepted = False


def test_shift_drag_on_the_overview_marks_a_span(qtbot):
    strip = OverviewStrip()
    qtbot.addWidget(strip)
    strip.resize(800, 160)
    strip.show()
    strip.set_recording_geometry([0.0], [180.0])
    qtbot.wait(10)
    box = strip.trace_box
    with qtbot.waitSignal(strip.condition_marked) as sig:
        box.mouseDragEvent(_Drag(box, 120.0, 60.0))
    t0, t1 = sig.args
    assert t0 == pytest.approx(60.0, abs=0.5) and t1 == pytest.approx(120.0, abs=0.5)
    plain = _Drag(box, 10.0, 20.0, shift=False)
    with qtbot.assertNotEmitted(strip.condition_marked):
        box.mouseDragEvent(plain)  # without Shift or marking mode a drag is not a condition
    assert not plain.accepted
    strip.set_marking(True)
    with qtbot.waitSignal(strip.condition_marked):
        box.mouseDragEvent(_Drag(box, 10.0, 20.0, shift=False))


def test_dialog_names_the_condition_and_sets_its_steady_state(qtbot):
    d = ConditionDialog(60.0, 120.0, duration_s=180.0, taken=["baseline"])
    qtbot.addWidget(d)
    assert d.name.currentText() == "drug"  # the first suggestion not yet taken
    d.name.setEditText("compound 1 uM")
    d.steady_kind.setCurrentIndex([d.steady_kind.itemData(i) for i in range(d.steady_kind.count())].index("last_beats"))
    d.steady_value.setValue(20)
    c = d.condition()
    assert (c.name, c.start, c.end, c.steady) == ("compound 1 uM", 60.0, 120.0, SteadyState("last_beats", 20.0))
    assert describe_condition(c) == "60.0–120.0 s; steady state: last 20 beats"
    d.name.setEditText("baseline")
    with pytest.raises(ConditionError):
        d.condition()
    d.accept()
    assert d.result_condition is None and "already named" in d.message.text()


def test_marking_in_the_window_adds_the_condition(qtbot):
    from analysis.synthetic import preset, synthesize
    from app.gui.window.main_window import MainWindow

    rec = synthesize(preset("nodal-like"), duration_s=12.0, fs_hz=2_000.0, seed=2).recording
    w = MainWindow(interactive=False)
    qtbot.addWidget(w)
    w.show()
    w.open_recording_file(rec, label="cell-m1")
    assert w.settle(60_000) and w.key is not None
    w.overview.condition_marked.emit(2.0, 7.5)
    (c,) = w.session.conditions(w.key)
    assert (c.name, c.start, c.end) == ("baseline", 2.0, 7.5)
    assert w.conditions_panel.list.count() == 1
    assert set(w.session.beats(w.key)["condition"]) <= {"baseline", ""}
    assert c.steady == SteadyState("auto")  # the summary's suggested steady state unless chosen
