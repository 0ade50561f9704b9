"""Which stage of the analysis each setting feeds, so that a change reruns only from there.

The analysis runs in stages, each reading what the ones before it made:

``detect``
    preprocessing and detection: the samples are read and the beats found.
``measure``
    the markers and features of every beat, from the detections; and the artefact rule, which
    decides which beats the others' cycle lengths and MDPs skip (it is judged while measuring).
``events``
    the trace's events (EAD, DAD, clipping, diastolic noise), read from the samples in windows.
``rules``
    the table's rules (pause, MDP drift, low APA, overshoot, the noise threshold) and which
    flags reject a beat: worked on the flagged table alone (:func:`analysis.flags.reapply_rules`).
``summary``
    the summaries of the reviewed table.

A change of settings reruns from the earliest stage any changed field feeds
(:func:`stage_of_change`); every field of :class:`analysis.settings.Settings` is assigned one
(``tests/analysis/pipeline/test_stages.py`` fails for a field left out).
"""

from __future__ import annotations

from dataclasses import fields
from typing import Any

from analysis.pipeline._sweep import MEASURING_QUALITY_FIELDS

__all__ = ["STAGES", "stage_of_change", "stage_of_field"]

#: The stages, earliest first; "none" when nothing changed.
STAGES: tuple[str, ...] = ("detect", "measure", "events", "rules", "summary")

#: The stage of each section's fields, unless :data:`_QUALITY` says otherwise.
_SECTIONS = {"preprocess": "detect", "detection": "detect", "measurement": "measure", "summary": "summary"}

#: The quality fields, one by one: what reads them.
_QUALITY = {
    **{f: "measure" for f in MEASURING_QUALITY_FIELDS},
    **{f: "events" for f in (
        "ead_smooth_ms", "ead_min_mV", "ead_min_dvdt_V_per_s", "ead_start_repol_pct", "dad_smooth_ms",
        "dad_min_mV", "clip_min_flat_ms", "clip_min_samples", "noise_highpass_hz",
    )},
    **{f: "rules" for f in (
        "pause_factor", "pause_median_beats", "noise_max_mV_rms", "mdp_drift_max_mV", "mdp_reference_beats",
        "apa_min_mV", "overshoot_min_mV", "reject_clipped", "reject_noisy", "reject_low_apa", "reject_mdp_drift",
        "reject_ead", "reject_dad", "reject_pause",
    )},
}


def stage_of_field(section: str, name: str) -> str:
    """The stage that reads ``section.name``; KeyError for a field no stage claims."""
    if section == "quality":
        return _QUALITY[name]
    return _SECTIONS[section]


def stage_of_change(old: Any, new: Any) -> str:
    """The earliest stage a change of settings from ``old`` to ``new`` reruns ("none": no change).

    Examples
    --------
    >>> import dataclasses
    >>> from analysis.settings import Settings
    >>> s = Settings()
    >>> stage_of_change(s, dataclasses.replace(s, quality=dataclasses.replace(s.quality, reject_pause=True)))
    'rules'
    >>> stage_of_change(s, dataclasses.replace(s, measurement=dataclasses.replace(s.measurement, mdp_smoothing_ms=3.0)))
    'measure'
    """
    if old == new:
        return "none"
    earliest = len(STAGES)
    for section in type(new).sections():
        a, b = getattr(old, section), getattr(new, section)
        if a == b:
            continue
        for f in fields(b):
            if getattr(a, f.name, None) != getattr(b, f.name):
                earliest = min(earliest, STAGES.index(stage_of_field(section, f.name)))
    return STAGES[earliest] if earliest < len(STAGES) else "none"
