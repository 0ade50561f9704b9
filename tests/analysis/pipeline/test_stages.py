"""Settings changes rerun only the stages they feed, and give what a fresh analysis gives."""

import dataclasses

import numpy as np
import pytest

from analysis.flags import reapply_rules
from analysis.pipeline import STAGES, analyze, stage_of_change, stage_of_field
from analysis.settings import Settings
from analysis.synthetic import EAD, preset, synthesize


def test_every_setting_is_assigned_a_stage():
    s = Settings()
    for section in type(s).sections():
        for f in dataclasses.fields(getattr(s, section)):
            assert stage_of_field(section, f.name) in STAGES, f"{section}.{f.name}"


@pytest.mark.parametrize("name, value, stage", [
    ("summary.steady_window_s", 20.0, "summary"),
    ("quality.reject_pause", True, "rules"),
    ("quality.ead_min_mV", 4.0, "events"),
    ("quality.reject_artefact", False, "measure"),
    ("measurement.mdp_smoothing_ms", 3.0, "measure"),
    ("preprocess.ljp_mV", 4.0, "detect"),
])
def test_a_change_reruns_from_the_stage_of_its_field(name, value, stage):
    s = Settings()
    assert stage_of_change(s, s) == "none"
    assert stage_of_change(s, s.replace(name, value)) == stage
    # The earliest stage wins when several change.
    assert stage_of_change(s, s.replace(name, value).replace("preprocess.ljp_mV", 2.0)) == "detect"


@pytest.fixture(scope="module")
def cell():
    return synthesize(preset("nodal-like"), duration_s=30.0, fs_hz=10_000.0, seed=4, noise_mV=0.3,
                      eads=[EAD(7, 6.0)]).recording


@pytest.mark.parametrize("name, value", [
    ("quality.reject_ead", True), ("quality.apa_min_mV", 85.0), ("quality.reject_low_apa", True),
    ("quality.noise_max_mV_rms", 0.2), ("quality.pause_factor", 1.1),
])
def test_rules_reapplied_to_the_table_give_what_the_events_give(cell, name, value):
    # The reference: analysis.flags.apply_events on the measured beats with the new settings.
    old = analyze(cell)
    new = Settings().replace(name, value)
    if name == "quality.apa_min_mV":
        new = new.replace("quality.reject_low_apa", True)
    got = reapply_rules(old.beats, new.quality)
    assert got is not None
    fresh = analyze(cell, new)
    for col in ("flags", "accepted", "reject_reason", "ead_mV", "noise_mV_rms"):
        a, b = np.asarray(got[0][col]), np.asarray(fresh.beats[col])
        assert (list(a) == list(b)) if a.dtype == object else np.array_equal(a, b, equal_nan=True), col
    assert got[1] == [w for w in fresh.warnings if "quality rules" in w or "mdp_drift" in w]


def test_measuring_from_the_detections_gives_what_a_fresh_analysis_gives(cell):
    # The reference: a full analysis (detection included) with the new measurement settings.
    old = analyze(cell)
    new = Settings().replace("measurement.mdp_smoothing_ms", 4.0)
    again = analyze(cell, new, detections=old.detections)
    fresh = analyze(cell, new)
    for col in ("t_upstroke_s", "mdp_mV", "t_mdp_s", "apd90_ms", "accepted"):
        assert np.array_equal(np.asarray(again.beats[col]), np.asarray(fresh.beats[col]), equal_nan=True), col
    assert not np.array_equal(np.asarray(again.beats["t_mdp_s"]), np.asarray(old.beats["t_mdp_s"]))


def test_apply_events_then_reapply_is_idempotent(cell):
    res = analyze(cell)
    table, _ = reapply_rules(res.beats, Settings().quality)
    assert list(table["flags"]) == list(res.beats["flags"])
    assert list(table["reject_reason"]) == list(res.beats["reject_reason"])
