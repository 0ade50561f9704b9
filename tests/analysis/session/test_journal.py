"""The review's autosave journal, without Qt: durable writes, replay, pending reviews."""

from __future__ import annotations

import json
import os
import sys

import numpy as np
import pytest

from analysis.conditions import parse_condition
from analysis.session import Session
from analysis.session import Journal, JournalError, pending_reviews, write_durably
from analysis.synthetic import preset, synthesize
from analysis.synthetic import write_abf


@pytest.fixture(scope="module")
def cell(tmp_path_factory):
    """A synthetic nodal-like cell (analysis.synthetic._cells), as ABF."""
    syn = synthesize(preset("nodal-like"), duration_s=10.0, fs_hz=4_000.0, seed=21, noise_mV=0.2)
    path = tmp_path_factory.mktemp("rec") / "cell-j3.abf"
    write_abf(syn.recording, path)
    return str(path)


def _reviewed(cell):
    s = Session()
    key = s.add(cell)
    s.reject(key, [2, 5], "electrode bump")
    s.accept(key, [3])
    s.set_conditions(key, [parse_condition("baseline=0-6s,steady=last3beats")])
    return s, key


def _verdicts(session, key):
    b = session.beats(key)
    return b["accepted"].tolist(), b["reject_reason"].tolist(), b["reviewed"].tolist()


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc/self/fd")
def test_a_write_is_fsynced_file_and_folder_before_it_returns(tmp_path, monkeypatch):
    synced = []
    real = os.fsync

    def spy(fd):
        synced.append(os.path.realpath(f"/proc/self/fd/{fd}"))
        return real(fd)

    monkeypatch.setattr(os, "fsync", spy)
    target = tmp_path / "journals" / "a.json"
    write_durably(target, '{"x": 1}')
    # POSIX fsync(2): the file's data, then the folder's entry for the rename, reach the disk.
    assert synced[0].startswith(str(target.parent / ".a.json.tmp-")) and synced[-1] == str(target.parent)
    assert target.read_text() == '{"x": 1}'
    assert [p.name for p in target.parent.iterdir()] == ["a.json"]  # no temporary file left


def test_a_killed_writers_temporary_file_is_cleared_by_the_next_write(tmp_path):
    left = tmp_path / ".a.json.tmp-999999999-xyz"  # no such process (pid above Linux's pid_max)
    left.write_text("half")
    write_durably(tmp_path / "a.json", "{}")
    assert not left.exists()


def test_the_journal_brings_back_every_decision_condition_and_setting(cell, tmp_path):
    s, key = _reviewed(cell)
    s.set_settings(s.settings(key).replace("preprocess.ljp_mV", 6.0))
    journal = Journal(cell, key, tmp_path)
    journal.write(s)
    offered = pending_reviews(tmp_path)
    assert [(p.origin, p.key, p.decisions) for p in offered] == [(os.path.abspath(cell), key, 3)]
    fresh = Session()
    assert fresh.add(cell) == key
    seen = []
    report = Journal(cell, key, tmp_path).restore(fresh, progress=lambda f, m: seen.append((f, m)))
    assert report.settings_changed and report.decisions == 3 and report.conditions == 1
    assert fresh.settings(key) == s.settings(key) and fresh.info(key).ljp_mV == 6.0
    assert fresh.conditions(key) == s.conditions(key)
    assert _verdicts(fresh, key) == _verdicts(s, key)
    assert seen[0][0] == 0.0 and seen[-1][0] == 1.0  # the re-analysis reported its progress
    assert Journal(cell, key, tmp_path).restore(fresh) is None  # nothing left to replay
    journal.discard()
    assert not journal.exists() and pending_reviews(tmp_path) == []


def test_writes_are_held_while_a_review_is_replayed(cell, tmp_path):
    s, key = _reviewed(cell)
    journal = Journal(cell, key, tmp_path)
    journal.write(s)
    review = journal.review()
    fresh = Session()
    fresh.add(cell)
    writes = []
    other = Journal(cell, key, tmp_path)
    # As the app does: every change notification writes the journal.
    fresh.subscribe("*", lambda change: (writes.append(change.event), other.write(fresh)))
    before = journal.path.read_bytes()
    with other.replaying(fresh):
        other.replay(fresh, review)
        assert journal.path.read_bytes() == before  # never half a review on disk
    assert "decisions_changed" in writes
    back = json.loads(journal.path.read_text())
    assert back["decisions"]["reason"] == ["electrode bump", "electrode bump", ""]  # then written whole, once
    assert back["conditions"][0]["name"] == "baseline" and _verdicts(fresh, key) == _verdicts(s, key)


def test_a_damaged_journal_is_refused_in_one_line_and_kept(cell, tmp_path):
    s, key = _reviewed(cell)
    journal = Journal(cell, key, tmp_path)
    journal.write(s)
    data = json.loads(journal.path.read_text())
    data["conditions"][0]["steady_kind"] = "whenever"
    journal.path.write_text(json.dumps(data))
    with pytest.raises(JournalError) as err:
        journal.review()
    assert str(journal.path) in err.value.one_line() and "\n" not in err.value.one_line()
    assert journal.exists()


def test_untouched_beats_keep_their_automatic_verdict(cell, tmp_path):
    s, key = _reviewed(cell)
    Journal(cell, key, tmp_path).write(s)
    fresh = Session()
    fresh.add(cell)
    base = fresh.beats(key)["accepted"].copy()
    Journal(cell, key, tmp_path).restore(fresh)
    rest = [i for i in range(len(base)) if i not in (2, 3, 5)]
    assert np.array_equal(fresh.beats(key)["accepted"][rest], base[rest])
