"""The cursor panel shows the core's readout, which equals numpy over the same samples."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from analysis.readouts import readout  # noqa: E402
from app.gui.panels.cursors import CursorPanel  # noqa: E402

from ..handmade import FS_HZ, handmade  # noqa: E402


def test_panel_text_is_numpy_over_the_samples_between(qtbot):
    rec, beats = handmade(n_sweeps=1)
    panel = CursorPanel()
    qtbot.addWidget(panel)
    t0, t1 = 1.1, 2.95
    r = readout(rec, t0, t1, upstrokes_s=beats["t_upstroke_s"])
    panel.show_readout(r)
    seg = rec.sweep(0)[int(np.ceil(t0 * FS_HZ)) : int(np.floor(t1 * FS_HZ)) + 1]
    assert panel.value_text("mean_value") == f"{np.mean(seg):.2f}"  # numpy reference
    assert panel.value_text("max_value") == f"{np.max(seg):.2f}"  # numpy reference
    assert panel.value_text("delta_t_ms") == f"{(t1 - t0) * 1e3:.2f}"
    ups = beats["t_upstroke_s"]
    assert panel.beats_label.text().startswith(f"upstrokes inside: {int(((ups >= t0) & (ups <= t1)).sum())}")
