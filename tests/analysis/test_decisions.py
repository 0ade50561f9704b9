"""A beat's status: the rules' verdict, the flags that hold it for review, then the user's decisions.

The rules are the project's own (CONTRACT.md, "Beats CSV": ``accepted`` is 1 for a beat the
summaries use, 0 when rejected or waiting for review); the tables are built by hand so that every
expected status can be read off the table.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from analysis.columns import FLAG_VOCABULARY
from analysis.decisions import (
    ACCEPT, ACCEPTED, AUTO, CLEAR, REJECT, REJECTED, TO_REVIEW, USER, Decision, DecisionLog, apply_status,
    beat_status, held_for_review, update_status,
)
from analysis.errors import SettingsError
from analysis.settings import QualitySettings, Settings
from analysis.table import BeatTable

DEFAULT_REVIEW = QualitySettings().review_flags


def _table():
    # Rows: clean; rejected by a rule; noisy; drifted MDP; EAD; pause and DAD; clipped and rejected.
    return BeatTable({
        "sweep": [0] * 7, "beat": list(range(7)), "t_upstroke_s": [0.5, 1.3, 2.1, 2.9, 3.7, 4.5, 5.3],
        "accepted": [1, 0, 1, 1, 1, 1, 0],
        "flags": ["", "artefact", "noisy", "noisy;mdp_drift", "ead", "dad;pause", "clipped"],
        "reject_reason": ["", "auto: artefact (dV/dt max 2000 V/s > 1000)", "", "", "", "", "auto: clipped"],
    })


def test_artefact_type_flags_hold_beats_for_review_and_physiological_ones_keep_them_in():
    st = beat_status(_table(), None, DEFAULT_REVIEW)
    assert st.status.tolist() == [ACCEPTED, REJECTED, TO_REVIEW, TO_REVIEW, ACCEPTED, ACCEPTED, REJECTED]
    assert st.decided_by.tolist() == [AUTO] * 7
    # A rule's rejection keeps its reason; a beat waiting for review has none (it is not rejected).
    assert st.reason[1].startswith("auto: artefact") and st.reason[2] == "" and st.reason[6] == "auto: clipped"
    assert st.used.tolist() == [True, False, False, False, True, True, False]
    assert st.counts() == {ACCEPTED: 3, REJECTED: 2, TO_REVIEW: 2}


def test_the_default_review_flags_are_the_artefact_type_ones():
    # The flags whose meaning is "this value may be wrong" (docs/measurements.md, Flags); EAD, DAD and
    # pause are physiology (MEASUREMENTS.md) and never hold a beat.
    assert set(DEFAULT_REVIEW) == {"clipped", "noisy", "mdp_drift", "low_apa", "artefact"}
    assert not {"ead", "dad", "pause", "no_overshoot", "no_diastole", "truncated"} & set(DEFAULT_REVIEW)


def test_user_decisions_win_and_clearing_one_returns_the_automatic_status():
    t = _table()
    stamp = "2026-01-01T00:00:00.000Z"
    log = DecisionLog([
        Decision(0, 2, 2.1, ACCEPT, "", stamp),
        Decision(0, 3, 2.9, REJECT, "seal or access trouble", stamp),
        Decision(0, 1, 1.3, ACCEPT, "", stamp),  # the user overrules a rule's rejection
        Decision(0, 4, 3.7, REJECT, "noise", stamp),
    ])
    st = beat_status(t, log, DEFAULT_REVIEW)
    assert st.status.tolist() == [ACCEPTED, ACCEPTED, ACCEPTED, REJECTED, REJECTED, ACCEPTED, REJECTED]
    assert st.decided_by.tolist() == [AUTO, USER, USER, USER, USER, AUTO, AUTO]
    assert st.reason[3] == "seal or access trouble" and st.reason[1] == "" and st.reason[4] == "noise"
    log.append([Decision(0, 2, 2.1, CLEAR, "", stamp)])
    again = beat_status(t, log, DEFAULT_REVIEW)
    assert again.status[2] == TO_REVIEW and again.decided_by[2] == AUTO


def test_the_status_written_into_a_table_reads_back_the_same():
    # The pipeline writes the automatic status into its table; the session reads it again from that
    # table with the decisions: a held beat's accepted = 0 must not turn into a rejection.
    once = apply_status(_table(), None, DEFAULT_REVIEW)
    assert once["accepted"].tolist() == [1, 0, 0, 0, 1, 1, 0]
    assert once["verdict"].tolist() == beat_status(_table(), None, DEFAULT_REVIEW).status.tolist()
    twice = apply_status(once, None, DEFAULT_REVIEW)
    assert twice.equals(once)
    # With no flag holding beats, the held ones are plainly accepted again.
    free = beat_status(once, None, ())
    assert free.status.tolist() == [ACCEPTED, REJECTED, ACCEPTED, ACCEPTED, ACCEPTED, ACCEPTED, REJECTED]


def test_a_table_without_reasons_takes_accepted_as_the_rules_verdict():
    t = {"sweep": [0, 0], "t_upstroke_s": [0.1, 0.9], "accepted": [0, 1], "flags": ["", "noisy"]}
    assert beat_status(t, None, ("noisy",)).status.tolist() == [REJECTED, TO_REVIEW]


def test_held_for_review_matches_whole_words_only():
    assert held_for_review(["noisy_ish", "a;noisy", ""], ["noisy"]).tolist() == [False, True, False]
    assert held_for_review(["noisy"], []).tolist() == [False]


def test_review_flags_setting_is_checked_against_the_flag_vocabulary():
    s = Settings().replace("quality.review_flags", ("noisy", "ead"))
    assert s.quality.review_flags == ("noisy", "ead")
    assert Settings.from_dict(s.to_dict()) == s  # the settings file round trip
    with pytest.raises(SettingsError, match=r"quality.review_flags .* holds 'nosiy', which is not known; use words from: no_diastole"):
        dataclasses.replace(QualitySettings(), review_flags=("nosiy",))
    with pytest.raises(SettingsError, match="repeats a word"):
        dataclasses.replace(QualitySettings(), review_flags=("noisy", "noisy"))
    with pytest.raises(SettingsError, match="not a list of words"):
        dataclasses.replace(QualitySettings(), review_flags="noisy")
    assert dataclasses.replace(QualitySettings(), review_flags=()).review_flags == ()  # nothing held


def test_the_flag_vocabulary_holds_every_word_the_core_writes():
    from analysis.beats import FLAG_WORDS
    from analysis.flags import EVENT_FLAGS

    written = set(FLAG_WORDS) | set(EVENT_FLAGS)
    assert written <= set(FLAG_VOCABULARY)
    # The one word not written yet is the phase-4 flag the measurement is to add.
    assert set(FLAG_VOCABULARY) - written <= {"no_phase4"}
    assert len(set(FLAG_VOCABULARY)) == len(FLAG_VOCABULARY)


def test_a_session_holds_flagged_beats_until_the_user_judges_them():
    from analysis.session import Session
    from analysis.synthetic import preset, synthesize

    syn = synthesize(preset("nodal-like"), duration_s=8.0, fs_hz=5_000.0, seed=3)
    s = Session(Settings().replace("quality.review_flags", ("pause", "noisy")))
    key = s.add(syn.recording, label="cell-07")
    auto = s.auto_beats(key)
    # Pretend a flag: a session reads the flags of its automatic table.
    flags = np.array(auto["flags"], dtype=object)
    flags[3] = (flags[3] + ";noisy").lstrip(";")
    s._entry(key).table = auto.with_columns(flags=flags)
    view = s.beats(key)
    assert view["verdict"][3] == TO_REVIEW and view["accepted"][3] == 0 and view["decided_by"][3] == AUTO
    assert s.review_status(key).status.tolist() == view["verdict"].tolist()
    s.accept(key, [3])
    view = s.beats(key)
    assert (view["verdict"][3], view["accepted"][3], view["decided_by"][3], view["reviewed"][3]) == (ACCEPTED, 1, USER, 1)
    s.undo()
    assert s.beats(key)["verdict"][3] == TO_REVIEW


def _entry(row: int, t: float, accepted: int, reason: str = "", sweep: int = 0) -> Decision:
    return Decision(sweep, row, t, accepted, reason, "2024-01-01T00:00:00.000Z", "review")


def test_a_verdict_added_updates_only_its_beat_and_equals_the_whole_table_worked_out_again():
    # The whole computation (apply_status over the grown log) is the reference; the rows each
    # entry names can be read off _table().
    table = _table()
    earlier = [_entry(2, 2.1, ACCEPT), _entry(4, 3.7, REJECT, "noise")]
    view = apply_status(table, DecisionLog(earlier), DEFAULT_REVIEW)
    steps = [
        [_entry(3, 2.9, REJECT, "seal trouble")],                # a held beat rejected
        [_entry(2, 2.1 + 0.004, CLEAR)],                         # within the tolerance: back to the rule
        [_entry(1, 1.3, ACCEPT), _entry(1, 1.3, REJECT, "x")],   # the later of two entries wins
        [_entry(6, 9.9, ACCEPT)],                                # applies to no beat: nothing changes
        [_entry(4, 3.7, ACCEPT, sweep=1)],                       # another sweep: no beat there
    ]
    log = list(earlier)
    for new in steps:
        log += new
        after = update_status(view, table, new, DEFAULT_REVIEW)
        whole = apply_status(table, DecisionLog(log), DEFAULT_REVIEW)
        assert after.equals(whole)
        view = after
    assert view["verdict"].tolist() == [ACCEPTED, REJECTED, TO_REVIEW, REJECTED, REJECTED, ACCEPTED, REJECTED]
    assert view["reject_reason"][1] == "x" and view["reject_reason"][3] == "seal trouble"


def test_a_sessions_reviewed_table_after_review_keys_equals_the_one_made_afresh():
    from analysis.session import Session
    from analysis.session._types import reviewed_table
    from analysis.synthetic import preset, synthesize

    syn = synthesize(preset("nodal-like"), duration_s=8.0, fs_hz=5_000.0, seed=3)
    s = Session(Settings().replace("quality.review_flags", ("pause", "noisy")))
    key = s.add(syn.recording, label="cell-07")
    s.beats(key)
    s.accept(key, [2])
    s.reject(key, [3, 4], "noise")
    s.undo()
    s.clear_decisions(key, [2])
    s.reject(key, [5], "seal or access trouble")
    view = s.beats(key)
    assert view.equals(reviewed_table(s._entry(key), s.match_tolerance_s))
    assert view["verdict"][5] == REJECTED and view["reject_reason"][5] == "seal or access trouble"
    auto = beat_status(s.auto_beats(key), None, ("pause", "noisy"))
    assert view["decided_by"][2] == AUTO and view["verdict"][2] == auto.status[2]  # cleared: the rules' verdict
