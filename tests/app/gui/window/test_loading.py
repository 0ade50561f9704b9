"""Re-analysis from the window: the session's own settings job, in a worker, with progress."""

from __future__ import annotations

import threading

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from analysis.session import Session  # noqa: E402


@pytest.fixture
def window(cell_window):
    w = cell_window()
    assert w.key is not None and not w.last_error
    return w


@pytest.fixture
def watch(monkeypatch, window):
    """Spies: the session's settings jobs made, the core's analyses of the recording (and on which
    thread), and the progress the window shows."""
    import analysis.pipeline as pipeline

    seen = {"jobs": [], "analyses": [], "progress": []}
    make, core = Session.settings_job, pipeline.analyze

    def settings_job(session, settings, keys=None, **kwargs):
        seen["jobs"].append(list(keys or ()))
        return make(session, settings, keys, **kwargs)

    def spy_analyze(rec, *args, **kwargs):
        if rec is window.recording:
            seen["analyses"].append((tuple(kwargs.get("sweeps") or ()), threading.current_thread() is threading.main_thread()))
        return core(rec, *args, **kwargs)

    monkeypatch.setattr(Session, "settings_job", settings_job)
    monkeypatch.setattr(pipeline, "analyze", spy_analyze)
    shown = window.feedback.on_progress
    window.feedback.on_progress = lambda fraction, text: (seen["progress"].append((fraction, text)), shown(fraction, text))
    return seen


def test_a_detection_change_is_the_sessions_job_run_off_the_gui_thread_with_progress(window, watch):
    before = window.session.beats(window.key)
    form = window.settings_form
    form.editors["measurement.upstroke_time_method"].set("voltage_level")
    form.apply()
    assert "re-analysing" in window.feedback.busy_reasons and not window.progress.isHidden()  # shown while it runs
    assert window.settle(60_000)
    assert watch["jobs"] == [[window.key]]  # the app asks the session, and only the session
    assert watch["analyses"] == [((), False)]  # every sweep analysed (all were), in a worker
    fractions = [f for f, _ in watch["progress"]]
    assert len(fractions) > 3 and fractions == sorted(fractions) and fractions[-1] == 1.0
    # A measurement setting measures again from the detections the table was made from.
    assert any("measuring" in text for _, text in watch["progress"])
    assert not any("detecting" in text for _, text in watch["progress"])
    after = window.session.beats(window.key)
    assert window.session.settings(window.key).measurement.upstroke_time_method == "voltage_level"
    moved = np.abs(after["t_upstroke_s"] - before["t_upstroke_s"])
    assert len(after) == len(before) and moved.max() > 0  # re-measured
    assert "measured again" in window.statusBar().currentMessage()
    assert window.progress.isHidden()



def test_a_summary_change_analyses_nothing_and_brings_its_summaries(window, watch):
    auto = window.session.auto_beats(window.key)
    window.settings_form.editors["summary.steady_window_s"].set(20.0)
    window.settings_form.apply()
    assert window.settle(60_000)
    assert watch["jobs"] == [[window.key]] and watch["analyses"] == []
    assert window.session.auto_beats(window.key) is auto
    assert window.session.settings(window.key).summary.steady_window_s == 20.0
    assert window.summaries is window.session.cached_summaries(window.key)  # the job's own, not recomputed
    assert "summaries updated" in window.statusBar().currentMessage()


def test_the_summaries_shown_are_the_sessions_and_a_stale_one_is_dropped(window, monkeypatch):
    applied = []
    keep = Session.set_summaries
    monkeypatch.setattr(Session, "set_summaries", lambda s, job, result: applied.append(keep(s, job, result)) or applied[-1])
    key = window.key
    n0, rows0 = window.summaries[0].values["n_used"], window.summaries[0].beat_rows
    window.select_beat(3)
    window.reject_current("noise")
    window.display.refresh_summary()  # a job for this state...
    window.select_beat(6)
    window.reject_current("noise")  # ...made stale before it is back
    assert window.settle(60_000)
    # Two jobs ran side by side, in either order: the stale result was dropped, the newest kept.
    assert sorted(applied) == [False, True]
    assert window.summaries is window.session.cached_summaries(key)
    # A rejected beat leaves the pooled summary if it was in it (common practice, no source).
    assert window.summaries[0].values["n_used"] == n0 - int(3 in rows0) - int(6 in rows0)
    values = window.summary_panel.summaries[0]
    assert values["n_used"] == window.summaries[0].values["n_used"]
