"""Opening another file (or showing another recording) starts its review at its own first beat."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from analysis.session import Session  # noqa: E402
from analysis.synthetic import preset, synthesize  # noqa: E402
from analysis.synthetic import write_abf  # noqa: E402


@pytest.fixture(scope="module")
def other_abf(tmp_path_factory):
    """A second nodal-like cell of another seed and length (so its rows are other beats)."""
    syn = synthesize(preset("nodal-like"), duration_s=6.0, fs_hz=4_000.0, seed=31, noise_mV=0.2)
    path = tmp_path_factory.mktemp("other") / "cell-s3.abf"
    write_abf(syn.recording, path)
    return path


@pytest.fixture
def window(cell_window):
    """The window on the first cell with a late beat of its second sweep under review."""
    w = cell_window(size=(1400, 900))
    assert not w.last_error
    late = int(np.flatnonzero(np.asarray(w.beats["sweep"]) == 1)[3])
    w.select_beat(late)
    assert w.current_row == late and w.table.current_table_row() == late and w.sweep == 1
    return w


def _first_measured_beat(beats) -> int:
    """Row of the second beat of sweep 0: the first with a diastole before it (MEASUREMENTS.md:
    a sweep's first beat has no MDP before it)."""
    rows = np.flatnonzero(np.asarray(beats["sweep"]) == 0)
    rows = rows[np.argsort(np.asarray(beats["t_upstroke_s"])[rows])]
    return int(rows[1])


def _assert_on_first_beat(w) -> None:
    b = w.beats
    row = _first_measured_beat(b)
    assert w.current_row == row and w.sweep == 0
    assert w.table.current_table_row() == row
    assert [i.row() for i in w.table.selectionModel().selectedRows()] == [w.table.beat_model.view_row(row)]
    assert w.beat_card.title.text().startswith(f"sweep 0 · beat {int(b['beat'][row])}  (2 of ")
    assert np.isfinite(b["mdp_mV"][row])  # a whole beat: its diastole measured
    lo, hi = w.trace_view.current_band._t0, w.trace_view.current_band._t1
    assert len(lo) == 1 and lo[0] < b["t_upstroke_s"][row] < hi[0]  # the trace highlights it too


def test_a_file_opened_next_shows_its_own_first_beat(window, other_abf):
    assert window.open_path(other_abf)
    # while it is analysed, nothing of the file before is shown as selected
    assert window.table.beat_model.rowCount() == 0 and window.table.current_table_row() == -1
    assert window.beat_card.title.text() == "no beat selected"
    assert _drawn(window) == {}  # no figure shows the file before under the new one's name
    assert window.settle(60_000) and not window.last_error
    assert window.session.label(window.key).endswith("cell-s3.abf")
    _assert_on_first_beat(window)
    window.figures.redraw()
    drawn = _drawn(window)
    assert drawn["poincare"] > 0 and drawn["time_course"] > 0  # drawn again from the new file


def _drawn(w) -> dict[str, int]:
    """Data items each figure draws (figures drawing none left out)."""
    counts = {}
    for key, figure in w.figures.figures.items():
        plots = [item for item in figure.ci.items if hasattr(item, "listDataItems")]
        n = sum(len(p.listDataItems()) for p in plots)
        if n:
            counts[key] = n
    return counts


def test_a_results_file_opened_next_shows_its_first_recordings_first_beat(window, other_abf, cell_abf, tmp_path):
    session = Session()
    session.add(other_abf)
    session.add(cell_abf)
    out = tmp_path / "two.h5"
    session.save(out)
    assert window.open_path(out) and window.settle(60_000) and not window.last_error
    assert window.key == session.recordings[0]
    _assert_on_first_beat(window)
    # and another recording of the file: its own first beat, not the row shown before
    window.select_beat(_first_measured_beat(window.beats) + 4)
    window.select_recording(session.recordings[1])
    assert window.settle(60_000)
    _assert_on_first_beat(window)


def test_reverting_keeps_the_beat_under_review(window, tmp_path):
    row = window.current_row
    window.reject_current("noise")
    assert window.save_results(tmp_path / "cell.h5")
    window.select_beat(row + 1)
    window.reject_current("electrical artefact")  # which moves on to the next beat
    shown = window.current_row
    assert shown == row + 2
    assert window.revert_to_saved() and window.settle(60_000)
    assert window.current_row == shown and window.table.current_table_row() == shown  # same recording
    assert window.beats["accepted"][row + 1] == 1  # and the unsaved rejection is gone
