"""The demo scenario: bundled files when present, else the same scenario made in memory."""

from __future__ import annotations

import math

import pytest

from app import demo_data


def test_scenario_conditions_cover_three_minutes_without_overlap():
    conds = demo_data.demo_conditions(None)
    assert [c.name for c in conds] == ["baseline", f"{demo_data.COMPOUND} 1 uM", "washout"]
    assert conds[0].start == 0.0 and conds[-1].end == math.inf
    assert all(a.end == b.start for a, b in zip(conds, conds[1:]))
    assert all(c.steady.kind == "last_s" and c.steady.value == 30.0 for c in conds)


def test_conditions_file_beside_the_samples_wins(tmp_path):
    (tmp_path / "conditions.txt").write_text("# the scenario\nbefore=0-30s\nafter=30s-end\n")
    assert [c.name for c in demo_data.demo_conditions(tmp_path)] == ["before", "after"]


def test_bundled_files_are_found_by_name(tmp_path, monkeypatch):
    (tmp_path / "cell_episodic.abf").write_bytes(b"1")
    (tmp_path / "cell_gapfree.abf").write_bytes(b"22")
    (tmp_path / "cell_gapfree.nwb").write_bytes(b"3")
    monkeypatch.setattr(demo_data, "_candidate_folders", lambda: [tmp_path / "absent", tmp_path])
    paths = demo_data.demo_paths()
    assert paths.found and paths.gap_free.name == "cell_gapfree.abf"
    assert paths.episodic.name == "cell_episodic.abf" and paths.nwb.name == "cell_gapfree.nwb"


@pytest.mark.slow
def test_in_memory_fallback_is_the_three_minute_recording(monkeypatch, tmp_path):
    monkeypatch.setattr(demo_data, "_candidate_folders", lambda: [tmp_path])
    rec, conds, label = demo_data.demo_recording()
    assert demo_data.CELL_ID in label and len(conds) == 3
    assert rec.duration_s == pytest.approx(demo_data.DURATION_S)
    assert rec.metadata["compound"] == demo_data.COMPOUND
