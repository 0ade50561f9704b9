"""The whole window on the demo scenario: analysed, conditions marked, every panel filled."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from app.demo_data import demo_recording  # noqa: E402
from app.gui.window.launch import prepare_screenshot_view  # noqa: E402
from app.gui.window.main_window import MainWindow  # noqa: E402


@pytest.mark.slow
def test_whole_window_on_the_demo_data(qtbot, tmp_path):
    source, conditions, label = demo_recording()
    w = MainWindow(interactive=False)
    qtbot.addWidget(w)
    w.show()
    if isinstance(source, (str, bytes)) or hasattr(source, "__fspath__"):
        assert w.open_path(source, conditions=conditions)
    else:
        w.open_recording_file(source, label=label, conditions=conditions)
    assert w.settle(300_000) and not w.last_error
    beats = w.beats
    assert len(beats) > 150  # three minutes of a nodal-like cell near 70 bpm
    assert [c.name for c in w.session.conditions(w.key)] == [c.name for c in conditions]
    assert w.summary_panel.columnCount() == len(conditions)
    assert w.conditions_panel.list.count() == len(conditions)
    assert len(w.overview.condition_bands[0]) == len(conditions)
    assert len(w.overview.envelope.xData) > 1000  # the whole recording's envelope is drawn
    prepare_screenshot_view(w)
    w.settle()
    assert w.trace_view.phases_visible() and w.trace_view.cursors_visible()
    assert w.last_readout is not None and np.isfinite(w.last_readout.mean_value)
    w.figures.redraw()
    assert set(w.figures.figures["aligned"].averages) == {c.name for c in conditions}
    paths = w.export_figures(tmp_path / "figs")
    assert len(paths) == 5
    w.export_beats_csv(tmp_path / "beats.csv")
    header = (tmp_path / "beats.csv").read_text().splitlines()[0]
    assert header.startswith("file,sweep,beat,t_upstroke_s,accepted")  # CONTRACT.md beats CSV
    assert w.render_png(tmp_path / "w.png").endswith("w.png")
