"""Real text recordings read as published: ../shared/real-ipsc against the counts of its README.

Source of every count, time and value checked here: the README of that folder (beats counted by
eye for these notes, on recordings from Clark AP, Clerx M, Wei S, et al., Leak current, even with
gigaohm seals, can cause misinterpretation of stem cell-derived cardiomyocyte action potential
recordings, Europace 2023;25(9):euad243). The README's table is parsed, not copied.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

from analysis import analyze, open_recording
from analysis.recording import CURRENT_CLAMP, VOLTAGE_CLAMP

pytestmark = pytest.mark.realdata

_ROW = re.compile(r"^\| (?P<cell>\S+) \| (?P<file>\S+\.csv) \| (?P<beats>\d+) \| (?P<borderline>\d+) \| "
                  r"(?P<cl>[\d.]*) \| (?P<mdp>[-\d.]*) \|", re.MULTILINE)
_TIMES = re.compile(r"^- `(?P<path>[^`]+)`: (?P<times>[\d. ]+)", re.MULTILINE)


def _readme(folder: Path) -> tuple[list[dict], dict[str, list[float]]]:
    text = (folder / "README.md").read_text(encoding="utf-8")
    rows = [m.groupdict() for m in _ROW.finditer(text)]
    times = {m["path"]: [float(t) for t in m["times"].split()] for m in _TIMES.finditer(text)}
    return rows, times


@pytest.fixture(scope="module")
def analysed(real_ipsc_dir):
    rows, times = _readme(real_ipsc_dir)
    assert len(rows) == len(list(real_ipsc_dir.glob("*/*.csv")))  # the table lists every file
    out = []
    for row in rows:
        path = real_ipsc_dir / row["cell"] / row["file"]
        rec = open_recording(path)
        out.append((row, times.get(f"{row['cell']}/{row['file']}", []), rec, analyze(rec).beats))
    return out


def test_every_file_reads_unmodified_with_the_current_density_kept_aside(analysed, real_ipsc_dir):
    for row, _, rec, _ in analysed:
        # The README: columns Time (s), Voltage (V), Current (pA/pF); 10 kHz.
        assert [(c.name, c.units, c.clamp_mode) for c in rec.channels] == [
            ("Voltage", "mV", CURRENT_CLAMP), ("Current", "pA/pF", VOLTAGE_CLAMP)]
        assert rec.sampling_rate_hz == pytest.approx(10_000.0, rel=1e-6)
    # numpy's own text parser (a reference library) on one file: volts x 1000 = the channel in mV.
    row, _, rec, _ = analysed[0]
    raw = np.loadtxt(real_ipsc_dir / row["cell"] / row["file"], delimiter=",", skiprows=1)
    np.testing.assert_allclose(rec.sweep(0, 0), raw[:, 1] * 1000.0, rtol=1e-12)
    np.testing.assert_array_equal(rec.sweep(0, 1), raw[:, 2])


def test_beat_counts_match_the_readme(analysed):
    problems = []
    for row, _, _, beats in analysed:
        certain, borderline = int(row["beats"]), int(row["borderline"])
        found = int(np.sum(np.asarray(beats["accepted"]) == 1)) if len(beats) else 0
        # README: borderline events may or may not be counted; a detector may differ by one beat
        # at a file's start or end.
        lo, hi = certain - (1 if certain else 0), certain + borderline + (1 if certain else 0)
        if not lo <= found <= hi:
            problems.append(f"{row['cell']}/{row['file']}: {found} beats, README {certain} (+{borderline} borderline)")
    assert not problems, problems


def test_every_certain_beat_is_found_where_the_readme_puts_it(analysed):
    for row, times, _, beats in analysed:
        if not times:
            continue
        t = np.asarray(beats["t_upstroke_s"], float)
        certain = times[: int(row["beats"])]  # the borderline times follow in brackets
        for want in certain:
            # Both times mark the upstroke; 10 ms is a small fraction of the shortest CL (about
            # 300 ms in the README's table). Edge beats may be cut (README).
            near = np.min(np.abs(t - want)) if t.size else np.inf
            assert near < 0.010 or want < 0.3 or want > 9.7, (row["file"], want, near)


def test_median_cycle_length_and_mdp_match_the_readme(analysed):
    for row, _, _, beats in analysed:
        if not row["cl"] or int(row["beats"]) < 5:
            continue  # the README's quinidine values come from a single interval
        cl = np.nanmedian(np.asarray(beats["cl_ms"], float))
        mdp = np.nanmedian(np.asarray(beats["mdp_mV"], float))
        assert cl == pytest.approx(float(row["cl"]), rel=0.02), row["file"]
        # README: MDP as the minimum of a 1 ms moving average between beats; 1.5 mV allows the
        # difference between that and the analysis's MDP estimator (MEASUREMENTS.md).
        assert mdp == pytest.approx(float(row["mdp"]), abs=1.5), row["file"]


def test_channel_names_any_column_and_a_current_density_is_never_analysed(real_ipsc_dir):
    path = real_ipsc_dir / "4_021921_1_alex_control" / "Pre-drug_spont.csv"
    rec = open_recording(path)
    assert len(analyze(rec, channel="Voltage").beats) == len(analyze(rec, channel=0).beats)
    with pytest.raises(Exception, match=r"pA/pF") as info:
        analyze(rec, channel="Current")
    assert "mV" not in str(info.value).split(";")[0] or "voltage-clamp" in str(info.value)
