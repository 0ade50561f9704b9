"""Phase spans from marker times: nodal-like beats have 4, 0, 3; plateau beats add 1 and 2."""

from __future__ import annotations

import numpy as np
import pytest

from analysis.beats import phase1_end_s, phase_spans
from analysis.table import BeatTable


def _table(**extra):
    cols = {
        "sweep": [0, 0, 1],
        "t_upstroke_s": [0.50, 1.30, 0.40],
        "t_mdp_s": [0.20, 1.00, np.nan],
        "t_top_s": [0.46, 1.26, np.nan],
        "t_peak_s": [0.52, 1.32, 0.42],
        "t_apd20_s": [0.56, 1.45, 0.46],
        "t_apd50_s": [0.60, 1.55, 0.50],
        "t_apd90_s": [0.66, 1.60, 0.58],
    }
    cols.update(extra)
    return BeatTable(cols)


def test_nodal_like_beat_has_phases_4_0_3_ending_at_the_next_mdp():
    spans = phase_spans(_table()).of_row(0)
    # APD90/APD50 = 0.16/0.10 = 1.6 > 1.4: no plateau (ratio rule, from memory)
    assert spans == {4: (0.20, 0.46), 0: (0.46, 0.52), 3: (0.52, 1.00)}


def test_plateau_beat_without_samples_has_a_plateau_from_the_peak_and_ends_at_apd90():
    spans = phase_spans(_table()).of_row(1)
    # APD90/APD50 = 0.30/0.25 = 1.2 <= 1.4: plateau (ratio rule, from memory); no samples, no phase 1
    assert spans == {4: (1.00, 1.26), 0: (1.26, 1.32), 2: (1.32, 1.45), 3: (1.45, 1.60)}


def test_phase_1_ends_at_the_notch_of_a_spike_and_dome_beat():
    fs = 10_000.0
    t = np.arange(int(0.4 * fs)) / fs
    # peak at 0, fast fall to a notch at 8 ms (+5 mV), dome back to +15 mV, plateau, repolarisation
    v = np.where(t < 0.008, 30 - 25 * t / 0.008, 5 + 10 * (1 - np.exp(-(t - 0.008) / 0.01)))
    v = np.where(t > 0.25, v - 80 * (1 - np.exp(-(t - 0.25) / 0.03)), v)
    assert phase1_end_s(v, fs, 0.0) == pytest.approx(0.008, abs=0.0006)  # the notch, by construction
    table = BeatTable({
        "sweep": [0], "t_upstroke_s": [-0.002], "t_mdp_s": [-0.3], "t_top_s": [-0.004], "t_peak_s": [0.0],
        "t_apd20_s": [0.26], "t_apd50_s": [0.28], "t_apd90_s": [0.33],
    })
    spans = phase_spans(table, samples=lambda sweep, a, b: v[max(a, 0):b], fs_hz=fs).of_row(0)
    assert spans[1][0] == 0.0 and spans[1][1] == pytest.approx(0.008, abs=0.0006)
    assert spans[2] == (spans[1][1], 0.26) and spans[3] == (0.26, 0.33)


def test_first_beat_without_diastole_has_no_phase_4_and_sweeps_do_not_mix():
    spans = phase_spans(_table()).of_row(2)
    assert 4 not in spans and 0 not in spans  # no MDP or TOP: those spans are left out
    assert spans[3] == (0.42, 0.58)  # peak to its own APD90, not to a beat of sweep 0


def test_rows_subset_and_missing_marker_columns():
    t = BeatTable({"sweep": [0, 0], "t_upstroke_s": [0.1, 0.9]})
    assert len(phase_spans(t)) == 0  # no marker times, no spans
    assert set(phase_spans(_table(), rows=np.array([1])).row) == {1}


def test_a_beat_without_apd90_has_no_span_after_its_peak():
    # Row 0 as a beat whose 90 % repolarisation is unknown (a sweep's first beat without its
    # diastole, or one cut by the sweep's end): no phase 3 from its peak to the next MDP, and
    # its phase 4 and 0 stay where their markers are (common practice, no source).
    t = _table(t_apd90_s=[np.nan, 1.60, 0.58])
    assert phase_spans(t).of_row(0) == {4: (0.20, 0.46), 0: (0.46, 0.52)}
    # No take-off either (no diastole recorded before it): nothing at all is shaded.
    t = _table(t_apd90_s=[np.nan, 1.60, 0.58], t_mdp_s=[np.nan, 1.00, np.nan], t_top_s=[np.nan, 1.26, np.nan])
    assert phase_spans(t).of_row(0) == {}
    # Row 2 (sweep 1's first beat) has its APD90 but no MDP or take-off: phase 3 only.
    assert phase_spans(_table()).of_row(2) == {3: (0.42, 0.58)}
