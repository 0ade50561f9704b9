"""The review session: decisions, conditions, undo/redo, notifications, settings, save/open."""

from __future__ import annotations

import math

import numpy as np
import pytest

from analysis.conditions import Condition, ConditionError, SteadyState, parse_condition
from analysis.session import Session
from analysis.settings import Settings
from analysis.synthetic import EAD, preset, synthesize
from analysis.synthetic import write_abf


@pytest.fixture(scope="module")
def syn():
    return synthesize(preset("nodal-like"), duration_s=20.0, fs_hz=5_000.0, seed=11, noise_mV=0.2,
                      eads=[EAD(6, amplitude_mV=8.0)])


@pytest.fixture
def session(syn):
    s = Session()
    s.add(syn.recording, label="cell-07")
    return s


def test_the_view_applies_decisions_and_keeps_every_row(session):
    key = session.recordings[0]
    n = len(session.auto_beats(key))
    assert n == len(session.beats(key)) > 10
    session.reject(key, [3, 4], "electrode bump")
    session.accept(key, [5])
    b = session.beats(key)
    assert len(b) == n  # rows are never deleted (CONTRACT.md)
    assert list(b["accepted"][3:6]) == [0, 0, 1]
    assert list(b["reject_reason"][3:5]) == ["electrode bump"] * 2
    assert list(b["reviewed"][2:7]) == [0, 1, 1, 1, 0]
    assert int(session.auto_beats(key)["accepted"][3]) == 1  # the automatic table is untouched
    session.clear_decisions(key, [3])
    b = session.beats(key)
    assert b["accepted"][3] == 1 and b["reviewed"][3] == 0 and b["reject_reason"][3] == ""
    log = session.decisions(key)
    assert [d.accepted for d in log] == [0, 0, 1, -1]  # a log: latest wins, nothing removed


def _state(session, key):
    b = session.beats(key)
    return (b["accepted"].tolist(), b["reject_reason"].tolist(), b["condition"].tolist())


def test_undo_redo_restores_every_intermediate_state(session):
    key = session.recordings[0]
    states = [_state(session, key)]
    steps = [
        lambda: session.reject(key, [1, 2], "noise burst"),
        lambda: session.reject(key, [2], "spike"),
        lambda: session.accept(key, [1]),
        lambda: session.set_conditions(key, [parse_condition("baseline=0-10s")]),
        lambda: session.clear_decisions(key, [2]),
        lambda: session.reject(key, [7, 8, 9], "drift"),
    ]
    for step in steps:
        step()
        states.append(_state(session, key))
    assert len({repr(s) for s in states}) == len(states)  # every step changed something
    for i in range(len(steps), 0, -1):
        assert session.undo_text
        session.undo()
        assert _state(session, key) == states[i - 1], f"undo to state {i - 1}"
    assert not session.can_undo
    for i in range(1, len(steps) + 1):
        session.redo()
        assert _state(session, key) == states[i], f"redo to state {i}"
    assert not session.can_redo
    session.undo()
    session.reject(key, [0], "new branch")  # a new edit drops the redo history
    assert not session.can_redo


def test_notifications_are_plain_callbacks(session):
    key = session.recordings[0]
    seen = []
    unsubscribe = session.subscribe("decisions_changed", seen.append)
    everything = []
    session.subscribe("*", lambda c: everything.append(c.event))
    session.reject(key, [4, 2], "bump")
    assert seen[-1].recording == key and seen[-1].rows == (2, 4)
    session.undo()
    assert len(seen) == 2 and "history_changed" in everything
    unsubscribe()
    session.redo()
    assert len(seen) == 2
    with pytest.raises(ValueError):
        session.subscribe("no_such_event", print)


def test_conditions_are_checked_and_fill_the_column(session, syn):
    key = session.recordings[0]
    session.set_conditions(key, [parse_condition("drug=10s-end,steady=last5beats"), parse_condition("baseline=0-10s")])
    conds = session.conditions(key)
    assert [c.name for c in conds] == ["baseline", "drug"]  # sorted by start
    b = session.beats(key)
    t = b["t_upstroke_s"]
    assert set(b["condition"][t < 10.0]) == {"baseline"} and set(b["condition"][t >= 10.0]) == {"drug"}
    with pytest.raises(ConditionError, match="overlap"):
        session.add_condition(key, parse_condition("washout=9-12s"))
    with pytest.raises(ConditionError, match="two conditions"):
        session.add_condition(key, parse_condition("drug=15-18s"))
    session.replace_condition(key, "drug", Condition("drug", 10.0, math.inf, steady=SteadyState("all")))
    rows = {s.values["condition"]: s.values for s in session.summaries(key)}
    assert rows["drug"]["window"] == "all"
    assert rows["drug"]["n_used"] == int(((b["condition"] == "drug") & (b["accepted"] == 1)).sum())


@pytest.mark.parametrize(
    "text, expected",
    [
        ("baseline=0-60s", ("baseline", 0.0, 60.0, "s", "auto")),
        ("drug=1min-3.5min,steady=last30s", ("drug", 60.0, 210.0, "s", "last30s")),
        ("washout=180s-end", ("washout", 180.0, math.inf, "s", "auto")),
        ("episodic=sweeps:2-5,steady=last20beats", ("episodic", 2.0, 5.0, "sweeps", "last20beats")),
        ("one=sweep:4,steady=all", ("one", 4.0, 4.0, "sweeps", "all")),
    ],
)
def test_condition_syntax(text, expected):
    c = parse_condition(text)
    assert (c.name, c.start, c.end, c.unit, c.steady.text()) == expected
    assert parse_condition(c.text()) == c


@pytest.mark.parametrize("bad", ["baseline", "x=60-0s", "x=a-b", "x=0-1s,steady=soon", "=0-5s", "x=0-5s,colour=red"])
def test_bad_condition_text_is_refused_with_the_syntax(bad):
    with pytest.raises(ConditionError) as err:
        parse_condition(bad)
    assert "\n" not in err.value.one_line()


def test_settings_changes_recompute_only_what_they_affect(session):
    key = session.recordings[0]
    auto = session.auto_beats(key)
    assert session.set_settings(Settings().replace("summary.steady_window_s", 30.0)) == {key: "summary"}
    assert session.auto_beats(key) is auto
    scopes = session.set_settings(session.settings(key).replace("quality.reject_ead", True))
    assert scopes == {key: "rules"}
    after = session.auto_beats(key)
    assert np.array_equal(after["t_upstroke_s"], auto["t_upstroke_s"])  # nothing re-detected
    ead = np.array(["ead" in f for f in after["flags"]])
    assert ead.sum() == 1 and after["accepted"][ead][0] == 0  # the rule now rejects it
    session.undo()
    assert session.auto_beats(key).equals(auto) and not session.settings(key).quality.reject_ead


@pytest.mark.parametrize("change", [("quality.reject_artefact", False), ("quality.artefact_min_apd90_ms", 5.0)])
def test_an_artefact_rule_change_measures_the_neighbours_again(change):
    """A wide electrical artefact (6 ms, 80 mV) is detected and rejected, and its neighbours take
    their cycle length and MDP from the real beats around it. A change of that rule must give
    what a fresh analysis with the new settings gives (the reference: analysis.pipeline._analyze.analyze)."""
    from analysis.pipeline import analyze
    from analysis.synthetic import Artefact

    rec = synthesize(preset("nodal-like"), duration_s=40.0, fs_hz=10_000.0, seed=5, noise_mV=0.3,
                     artefacts=[Artefact(33.1, 80.0, 60)]).recording
    s = Session()
    key = s.add(rec, label="cell-31")
    assert any(r.startswith("auto: artefact") for r in s.auto_beats(key)["reject_reason"])
    new = Settings().replace(*change)
    assert s.set_settings(new) == {key: "measure"}
    fresh = analyze(rec, new, label="cell-31").beats
    got = s.auto_beats(key)
    for name in ("t_upstroke_s", "cl_ms", "mdp_mV", "apd90_ms", "accepted"):
        assert np.array_equal(np.asarray(got[name]), np.asarray(fresh[name]), equal_nan=True), name
    assert list(got["reject_reason"]) == list(fresh["reject_reason"])


def test_decisions_survive_a_reanalysis_matched_by_time(session):
    key = session.recordings[0]
    session.reject(key, [3], "bump")
    session.accept(key, [8])
    before = session.beats(key)["t_upstroke_s"].copy()
    t3 = before[3]
    new = Settings().replace("measurement.upstroke_time_method", "voltage_level")
    assert session.set_settings(new) == {key: "measure"}
    b = session.beats(key)
    shifted = b["t_upstroke_s"]
    assert shifted.size == before.size
    moved = np.abs(shifted - before)
    assert moved.min() > 0 and moved.max() < 0.010  # re-measured: every upstroke moved a little
    i3 = int(np.argmin(np.abs(shifted - t3)))
    assert abs(shifted[i3] - t3) < 0.010
    assert b["accepted"][i3] == 0 and b["reject_reason"][i3] == "bump" and b["reviewed"].sum() == 2
    assert session.orphaned_decisions(key) == []


def test_decisions_whose_beat_is_gone_are_reported(syn):
    s = Session(match_tolerance_s=1e-9)
    key = s.add(syn.recording, label="cell-07")
    s.reject(key, [2], "bump")
    s.set_settings(Settings().replace("measurement.upstroke_time_method", "voltage_level"))
    assert [d.reason for d in s.orphaned_decisions(key)] == ["bump"]
    assert (s.beats(key)["reviewed"] == 0).all()


def test_save_and_open_restore_the_session_exactly(session, syn, tmp_path):
    key = session.recordings[0]
    session.reject(key, [2, 3], "bump")
    session.accept(key, [4])
    session.undo()
    session.set_conditions(key, [parse_condition("baseline=0-9.5s,steady=last5beats"), parse_condition("drug=9.5s-end")])
    session.set_settings(Settings().replace("quality.noise_max_mV_rms", 0.5))
    assert session.modified
    path = tmp_path / "study.h5"
    session.save(path)
    assert not session.modified
    back = Session.open(path)
    assert back.recordings == session.recordings and not back.modified
    assert back.beats(key).equals(session.beats(key))
    assert back.auto_beats(key).equals(session.auto_beats(key))
    assert back.decisions(key) == session.decisions(key)
    assert back.conditions(key) == session.conditions(key)
    assert back.settings(key) == session.settings(key)
    assert back.warnings(key) == session.warnings(key)
    assert back.summary_table() .keys() == session.summary_table().keys()
    for name, col in session.summary_table().items():
        other = back.summary_table()[name]
        assert np.array_equal(col, other, equal_nan=col.dtype.kind == "f"), name
    # Re-saving the reopened session (no source: in-memory data) keeps the same datasets.
    back.save(tmp_path / "again.h5")
    again = Session.open(tmp_path / "again.h5")
    assert again.beats(key).equals(session.beats(key))


def test_replacing_a_recording_keeps_its_review(tmp_path, syn):
    path = tmp_path / "cell.abf"
    write_abf(syn.recording, path)
    s = Session()
    key = s.add(str(path))
    s.reject(key, [3], "bump")
    s.set_conditions(key, [parse_condition("baseline=0-10s")])
    key2 = s.add(str(path), settings=Settings().replace("quality.apa_min_mV", 50.0))
    assert key2 == key and s.recordings == (key,)
    assert s.beats(key)["reject_reason"][3] == "bump"
    assert s.conditions(key)[0].name == "baseline"
    assert s.info(key).sha256 and s.info(key).reader == "abf"


def test_summary_jobs_are_kept_only_while_current(session):
    key = session.recordings[0]
    job = session.summary_job(key)
    fresh = job()
    assert session.set_summaries(job, fresh)
    assert session.summaries(key) is fresh
    stale = session.summary_job(key)
    session.reject(key, [3], "bump")  # the session changes while the job runs
    assert not session.set_summaries(stale, stale())
    now = session.summaries(key)
    assert now is not fresh
    assert now[0].values["n_used"] == fresh[0].values["n_used"] - 1


def test_saving_twice_gives_identical_datasets(session, tmp_path):
    # docs/results-format.md: the same content gives identical datasets and attributes.
    import h5py

    key = session.recordings[0]
    session.reject(key, [2], "bump")
    session.save(tmp_path / "a.h5")
    session.save(tmp_path / "b.h5")

    def dump(path):
        out = {}
        with h5py.File(path, "r") as f:
            f.visititems(lambda name, obj: out.__setitem__(name, (
                repr({k: np.asarray(v).tolist() for k, v in obj.attrs.items()}),
                repr(np.asarray(obj[()]).tolist()) if isinstance(obj, h5py.Dataset) else None,
            )))
        return out

    assert dump(tmp_path / "a.h5") == dump(tmp_path / "b.h5")


def test_changing_the_sweeps_analyses_only_the_new_ones():
    syn = synthesize(preset("atrial-like"), duration_s=6.0, fs_hz=5_000.0, seed=5, n_sweeps=4, sweep_gap_s=1.0)
    whole = Session()
    ref = whole.auto_beats(whole.add(syn.recording, label="ep"))
    s = Session()
    key = s.add(syn.recording, label="ep", sweeps=[0, 1])
    assert set(s.auto_beats(key)["sweep"]) == {0, 1}
    s.set_sweeps(key, None)
    got = s.auto_beats(key)
    # Sweeps analysed apart give what one analysis of every sweep gives.
    assert got.names == ref.names
    for name in ("sweep", "beat", "t_upstroke_s", "flags", "accepted", "apd90_ms", "mdp_mV"):
        a, b = got[name], ref[name]
        assert (np.array_equal(a, b, equal_nan=True) if a.dtype.kind == "f" else np.array_equal(a, b)), name
    row = int(np.flatnonzero(got["sweep"] == 3)[1])
    s.reject(key, [row], "bump")
    s.set_sweeps(key, [0, 1, 2])
    assert 3 not in set(s.beats(key)["sweep"]) and len(s.orphaned_decisions(key)) == 1
    s.undo()  # back to all sweeps: the decision applies again
    assert s.beats(key)["reject_reason"][row] == "bump" and s.info(key).sweeps is None


def test_the_ljp_is_the_settings_own_and_every_trace_follows_it(syn, tmp_path):
    s = Session()
    key = s.add(syn.recording, label="cell-07")
    raw = syn.recording.sweep(0)
    ens0 = s.summaries(key)[0].ensemble
    assert s.info(key).ljp_mV == 0.0 and np.array_equal(s.trace_mV(key, 0), raw)
    s.set_settings(s.settings(key).replace("preprocess.ljp_mV", 10.0))
    assert s.info(key).ljp_mV == 10.0 == s.settings(key).preprocess.ljp_mV
    # V_true = V_measured - LJP (Barry & Lynch 1991, J Membr Biol 121:101)
    assert np.allclose(s.trace_mV(key, 0), raw - 10.0, atol=1e-12)
    ens = s.summaries(key)[0].ensemble
    assert ens.v_mV.size == ens0.v_mV.size and np.allclose(ens.v_mV, ens0.v_mV - 10.0, atol=1e-9)  # same correction
    s.save(tmp_path / "ljp.h5")
    import h5py

    with h5py.File(tmp_path / "ljp.h5", "r") as f:  # the results file's ljp_mV is the settings' (CONTRACT.md)
        stored = f["index/ljp_mV"][()].tolist()
    assert stored == [10.0]
    assert Session.open(tmp_path / "ljp.h5").info(key).ljp_mV == 10.0
    s.undo()
    assert s.info(key).ljp_mV == 0.0 and np.array_equal(s.trace_mV(key, 0), raw)
    assert np.allclose(s.summaries(key)[0].ensemble.v_mV, ens0.v_mV, atol=1e-9)


@pytest.fixture
def episodic():
    """Four sweeps of which two are analysed, with spies on the core's analysis and rules."""
    syn = synthesize(preset("atrial-like"), duration_s=5.0, fs_hz=5_000.0, seed=5, n_sweeps=4, sweep_gap_s=1.0)
    s = Session()
    key = s.add(syn.recording, label="ep", sweeps=[0, 2])
    return s, key, syn.recording


def _spy(monkeypatch, recording):
    import analysis.pipeline as pipeline

    calls = {"analyze": [], "rules": 0}
    analyze, rules = pipeline.analyze, pipeline.flag_and_reject

    def spy_analyze(rec, *args, **kwargs):
        if rec is recording:  # not the ensemble beat's own measurement
            calls["analyze"].append(tuple(kwargs.get("sweeps") or ()))
        return analyze(rec, *args, **kwargs)

    def spy_rules(beats, rec, *args, **kwargs):
        calls["rules"] += rec is recording
        return rules(beats, rec, *args, **kwargs)

    monkeypatch.setattr(pipeline, "analyze", spy_analyze)
    monkeypatch.setattr(pipeline, "flag_and_reject", spy_rules)
    monkeypatch.setattr(pipeline._analyze, "flag_and_reject", spy_rules)  # analyze's own call
    return calls


def _progress():
    seen = []
    return seen, lambda fraction, message: seen.append((fraction, message))


def _check_progress(seen):
    fractions = [f for f, _ in seen]
    assert fractions == sorted(fractions) and fractions[0] == 0.0 and fractions[-1] == 1.0
    assert all(isinstance(m, str) and m for _, m in seen)


@pytest.mark.parametrize("name, value, scope, analysed, rules", [
    ("summary.steady_window_s", 20.0, "summary", [], 0),
    ("quality.noise_max_mV_rms", 0.4, "rules", [], 0),
    ("quality.ead_min_mV", 4.0, "events", [], 1),
    ("measurement.mdp_smoothing_ms", 3.0, "measure", [(0, 2)], 1),
    ("detection.min_amplitude_mV", 25.0, "detect", [(0, 2)], 1),
    ("preprocess.ljp_mV", 4.0, "detect", [(0, 2)], 1),
])
def test_prepare_settings_computes_only_what_the_change_needs_with_progress(
        episodic, monkeypatch, name, value, scope, analysed, rules):
    s, key, rec = episodic
    new = s.settings(key).replace(name, value)
    calls = _spy(monkeypatch, rec)
    seen, progress = _progress()
    change = s.prepare_settings(new, progress=progress)
    assert change.scopes == {key: scope}
    assert calls["analyze"] == analysed  # only the analysed sweeps, and only for detection-level changes
    assert calls["rules"] == rules
    _check_progress(seen)
    if scope == "detect":
        assert len({f for f, _ in seen}) > 4 and any("detecting" in m for _, m in seen)
    if scope == "measure":
        assert not any("detecting" in m for _, m in seen) and any("measuring" in m for _, m in seen)
    assert s.settings(key) != new  # preparing changes nothing
    assert s.apply_settings(change) and s.settings(key) == new
    # The summaries came with the change: the session does not summarise again.
    assert s.cached_summaries(key) is change.summaries[key]
    assert set(s.beats(key)["sweep"]) == {0, 2}


def test_a_settings_change_prepared_from_an_older_state_is_dropped(episodic):
    s, key, _rec = episodic
    job = s.settings_job(s.settings(key).replace("quality.noise_max_mV_rms", 0.4))
    s.set_settings(s.settings(key).replace("measurement.upstroke_time_method", "voltage_level"))
    now = s.settings(key)
    assert not s.apply_settings(job())  # its beats were measured with the old definitions
    assert s.settings(key) == now


def test_summaries_prepared_before_a_decision_are_not_kept(episodic):
    s, key, _rec = episodic
    job = s.settings_job(s.settings(key).replace("summary.steady_window_s", 20.0))
    s.reject(key, [1], "bump")  # the user goes on reviewing while the job runs
    change = job()
    assert s.apply_settings(change) and s.cached_summaries(key) is None
    n = change.summaries[key][0].values["n_used"]
    assert s.summaries(key)[0].values["n_used"] == n - 1
