"""Analysis settings: frozen dataclasses with units, bounds, choices, docs and sources.

The settings are one :class:`Settings` made of sections (``preprocess``, ``detection``,
``measurement``, ...). Every field is declared with :func:`setting`, which records its unit, its
allowed range or choices, a one-line description and the published source of the definition it
selects. That metadata drives the bounds checks here, the TOML file, the results file (through
:meth:`Settings.to_dict`) and the settings form of the desktop app (:func:`describe`).

Adding a section
----------------
1. Write a frozen dataclass that derives from :class:`Section`, with a class attribute
   ``key = "quality"`` (its name in files) and one :func:`setting` per field::

       @dataclass(frozen=True)
       class QualitySettings(Section):
           key: ClassVar[str] = "quality"
           apa_min_mV: float = setting(40.0, unit="mV", min=0.0, max=200.0,
                                       doc="smallest acceptable amplitude", source="from memory")

2. Add one line to :class:`Settings`: ``quality: QualitySettings = section(QualitySettings)``.

Nothing else changes: validation, ``to_dict``/``from_dict``, TOML, the hash and the GUI form all
walk the sections of :class:`Settings`. Adding a section with defaults changes the short hash of
every settings object; raise :data:`SCHEMA_VERSION` when a field changes meaning or is removed.

The declaration machinery (:func:`setting`, :class:`Section`, :class:`FieldInfo`) is in
:mod:`analysis.settings_fields` and the TOML files in :mod:`analysis.settings_io`; both are
re-exported here, so ``from analysis.settings import ...`` is all a caller needs.

Supported field types: ``float``, ``int``, ``bool``, ``str``, ``float | None`` (an optional
value; such fields must default to None, because TOML has no null: a missing key means None) and
``tuple[float, ...]``.
"""

import dataclasses
import hashlib
import json
import os
import typing
from dataclasses import dataclass, field, fields
from typing import Any, ClassVar, Mapping

from .errors import SettingsError
from .settings_fields import FieldInfo, Section, _check_value, _kind, _range_text, section, setting  # noqa: F401

__all__ = [
    "SCHEMA_VERSION",
    "FieldInfo",
    "Section",
    "PreprocessSettings",
    "DetectionSettings",
    "MeasurementSettings",
    "QualitySettings",
    "SummarySettings",
    "Settings",
    "setting",
    "section",
    "describe",
    "load_settings",
    "save_settings",
]

#: Version of the settings layout; stored with every result. Raise it when a field is renamed,
#: removed or changes meaning.
SCHEMA_VERSION = 1


# -- the sections --------------------------------------------------------------------------------
_LJP_SOURCE = "Barry & Lynch 1991, J Membr Biol 121:101; Neher 1992, Methods Enzymol 207:123"
_NO_SOURCE = "common practice, no source"


@dataclass(frozen=True)
class PreprocessSettings(Section):
    """What is done to the samples before detection and measurement."""

    key: ClassVar[str] = "preprocess"

    ljp_mV: float = setting(
        0.0, unit="mV", min=-100.0, max=100.0, source=_LJP_SOURCE,
        doc="liquid-junction potential subtracted from every sample: V_true = V_measured - LJP",
    )
    lowpass_hz: float | None = setting(
        None, unit="Hz", min=10.0, max=1_000_000.0, source="zero-phase Butterworth (forward and backward); " + _NO_SOURCE,
        doc="corner of an optional zero-phase low-pass filter; leave out for none",
    )
    lowpass_order: int = setting(
        4, min=1, max=10, source=_NO_SOURCE,
        doc="order of the low-pass Butterworth filter (doubled by running it forward and backward)",
    )
    notch_hz: float | None = setting(
        None, unit="Hz", choices=(50.0, 60.0), source="second-order IIR notch, forward and backward; " + _NO_SOURCE,
        doc="mains frequency to remove with a zero-phase notch (50 or 60); leave out for none",
    )
    notch_harmonics: int = setting(
        1, min=1, max=10, source=_NO_SOURCE,
        doc="how many harmonics of the mains frequency the notch removes (1: the fundamental only)",
    )
    hum_removal: str = setting(
        "auto", choices=("auto", "off"), source="sinusoid fitting of line noise; " + _NO_SOURCE,
        doc="estimate 50/60 Hz hum (and harmonics) as a slowly varying sinusoid and subtract it where present",
    )
    hum_block_s: float = setting(
        1.0, unit="s", min=0.2, max=60.0, source=_NO_SOURCE,
        doc="length of the sliding window over which the hum's amplitude and phase are estimated",
    )
    hum_min_mV: float = setting(
        0.05, unit="mV", min=0.0, max=10.0, source=_NO_SOURCE,
        doc="hum components smaller than this are left alone",
    )
    notch_q: float = setting(
        30.0, min=1.0, max=300.0, source=_NO_SOURCE,
        doc="quality factor of the notch: its width is the mains frequency / Q",
    )


@dataclass(frozen=True)
class DetectionSettings(Section):
    """How beats are found in a sweep (see analysis.detect)."""

    key: ClassVar[str] = "detection"
    order: ClassVar[tuple[tuple[str, str, str], ...]] = (("low_fraction", "<", "high_fraction"),)

    smoothing_ms: float = setting(
        1.0, unit="ms", min=0.0, max=20.0, source="moving average; " + _NO_SOURCE,
        doc="window of the centred moving average of V used to find beats (0: none; it shrinks what "
        "is left of a short artefact, where a Savitzky-Golay fit would keep its peak)",
    )
    derivative_window_ms: float = setting(
        5.0, unit="ms", min=0.1, max=50.0, source="difference of two moving averages; " + _NO_SOURCE,
        doc="span of the smoothed dV/dt used to find upstrokes: the means of V over its two halves, "
        "their difference over the time between their centres (wide: finds slow nodal upstrokes in noise)",
    )
    min_dvdt_V_per_s: float = setting(
        0.5, unit="V/s", min=0.01, max=1000.0, source=_NO_SOURCE,
        doc="an upstroke's smoothed dV/dt must exceed this (and noise_factor x its noise)",
    )
    noise_factor: float = setting(
        5.0, min=1.0, max=50.0, source=_NO_SOURCE,
        doc="an upstroke's smoothed dV/dt must exceed this many times the derivative's noise",
    )
    min_amplitude_mV: float = setting(
        30.0, unit="mV", min=1.0, max=200.0, source=_NO_SOURCE,
        doc="smallest rise from the diastolic level to the peak that counts as a beat",
    )
    low_fraction: float = setting(
        0.3, min=0.0, max=0.9, source="hysteresis (Schmitt trigger); " + _NO_SOURCE,
        doc="V must fall below diastole + this fraction of the local amplitude between beats",
    )
    high_fraction: float = setting(
        0.6, min=0.05, max=1.0, source="hysteresis (Schmitt trigger); " + _NO_SOURCE,
        doc="an upstroke must rise above diastole + this fraction of the local amplitude",
    )
    level_window_s: float = setting(
        4.0, unit="s", min=0.1, max=600.0, source=_NO_SOURCE,
        doc="length of the blocks over which the diastolic and peak levels are estimated (follows drift)",
    )
    min_interval_ms: float = setting(
        100.0, unit="ms", min=1.0, max=60_000.0, source=_NO_SOURCE,
        doc="shortest time between two upstrokes; a later one closer than this is an artefact",
    )
    min_width_ms: float = setting(
        3.0, unit="ms", min=0.0, max=1000.0, source=_NO_SOURCE,
        doc="events narrower than this at half amplitude are electrical artefacts, not beats",
    )
    working_rate_hz: float = setting(
        4000.0, unit="Hz", min=500.0, max=10_000_000.0, source=_NO_SOURCE,
        doc="beats are found on the trace averaged down to about this rate (measurement uses every sample)",
    )
    spike_max_ms: float = setting(
        2.0, unit="ms", min=0.0, max=5.0, source=_NO_SOURCE,
        doc="an excursion that leaves the trace and comes back within this time is an electrical spike "
        "(bridged before detecting and measuring; 0: never)",
    )
    spike_min_mV: float = setting(
        10.0, unit="mV", min=1.0, max=200.0, source=_NO_SOURCE,
        doc="a spike stands out at least this far (and 10 x the noise) from the trace on both sides",
    )
    spike_guard_ms: float = setting(
        0.2, unit="ms", min=0.0, max=5.0, source=_NO_SOURCE,
        doc="samples this close to a spike are bridged with it (its edges and ringing)",
    )
    chunk_s: float = setting(
        60.0, unit="s", min=0.5, max=36_000.0, source=_NO_SOURCE,
        doc="long sweeps are worked in chunks of this length (bounds memory)",
    )
    chunk_overlap_s: float = setting(
        4.0, unit="s", min=0.1, max=600.0, source=_NO_SOURCE,
        doc="context read on each side of a chunk; must exceed the longest cycle expected",
    )


TOP_METHODS = ("dvdt_criterion", "dvdt_fraction", "d2v_max", "linear_fits")
DDR_METHODS = ("linear", "early_late", "exponential")
APD_REFERENCES = ("dvdt_max", "top", "peak")
UPSTROKE_TIME_METHODS = ("dvdt_max", "voltage_level")
DVDT_MAX_METHODS = ("adaptive_savgol", "central_difference")


@dataclass(frozen=True)
class MeasurementSettings(Section):
    """Which published definition each per-beat parameter uses (see analysis.measure)."""

    key: ClassVar[str] = "measurement"
    order: ClassVar[tuple[tuple[str, str, str], ...]] = (
        ("dvdt_max_min_window_ms", "<=", "dvdt_max_max_window_ms"),
    )

    top_method: str = setting(
        "dvdt_criterion", choices=TOP_METHODS,
        source="MEASUREMENTS.md: fixed dV/dt criterion (default), fraction of dV/dt max, "
        "max d2V/dt2, intersection of linear fits (older microelectrode work, from memory)",
        doc="how the take-off potential is found",
    )
    top_dvdt_V_per_s: float = setting(
        0.5, unit="V/s", min=0.01, max=100.0, source="0.5 and 1 V/s are common criteria (MEASUREMENTS.md)",
        doc="dV/dt criterion of the take-off potential (top_method dvdt_criterion)",
    )
    top_fraction: float = setting(
        0.1, min=0.001, max=0.9, source="10 % of dV/dt max is common (MEASUREMENTS.md)",
        doc="fraction of dV/dt max that marks take-off (top_method dvdt_fraction)",
    )
    top_derivative_window_ms: float = setting(
        1.0, unit="ms", min=0.05, max=50.0, source="Savitzky-Golay derivative; " + _NO_SOURCE,
        doc="shortest Savitzky-Golay window of the dV/dt used for take-off (widened on noisy traces)",
    )
    top_derivative_max_window_ms: float = setting(
        10.0, unit="ms", min=0.05, max=100.0, source=_NO_SOURCE,
        doc="longest window the take-off dV/dt may be widened to on a noisy trace",
    )
    top_noise_fraction: float = setting(
        0.1, min=0.01, max=1.0, source=_NO_SOURCE,
        doc="the take-off dV/dt's noise is kept below this fraction of the criterion by widening its window",
    )
    top_d2v_window_ms: float = setting(
        2.0, unit="ms", min=0.1, max=50.0, source="Savitzky-Golay second derivative; " + _NO_SOURCE,
        doc="window of the d2V/dt2 used by top_method d2v_max",
    )
    top_fit_diastole_ms: float = setting(
        50.0, unit="ms", min=1.0, max=5000.0, source="from memory: older microelectrode work",
        doc="length of late diastole fitted by a line (top_method linear_fits)",
    )
    ddr_method: str = setting(
        "linear", choices=DDR_METHODS,
        source="linear fit MDP->TOP (default); early/late split at the inflection (from memory); "
        "exponential fit V = Vinf - A exp(-t/tau)",
        doc="how the diastolic depolarisation rate is measured",
    )
    ddr100_window_ms: float = setting(
        100.0, unit="ms", min=1.0, max=5000.0,
        source="Verkerk et al. 2007, Eur Heart J 28:2472; Fabbri et al. 2017, J Physiol 595:2365 (from memory)",
        doc="length of the early-DDR window after the MDP",
    )
    apd_reference: str = setting(
        "dvdt_max", choices=APD_REFERENCES, source="MEASUREMENTS.md",
        doc="the time APDs are measured from: dV/dt max, take-off or peak",
    )
    apd_percent: tuple[float, ...] = setting(
        (20.0, 50.0, 90.0), unit="%", min=1.0, max=100.0, source="MEASUREMENTS.md",
        doc="repolarisation levels of the APDs (each adds apdX_ms and t_apdX_s columns)",
    )
    upstroke_time_method: str = setting(
        "dvdt_max", choices=UPSTROKE_TIME_METHODS, source="MEASUREMENTS.md",
        doc="the beat's time reference: time of dV/dt max, or upward crossing of a voltage level",
    )
    upstroke_level_mV: float = setting(
        -20.0, unit="mV", min=-150.0, max=100.0, source=_NO_SOURCE,
        doc="voltage level of the upstroke time (upstroke_time_method voltage_level)",
    )
    dvdt_max_method: str = setting(
        "adaptive_savgol", choices=DVDT_MAX_METHODS, source="Savitzky-Golay 1964, Anal Chem 36:1627",
        doc="dV/dt max from a Savitzky-Golay derivative sized to the upstroke, or a plain central difference",
    )
    dvdt_max_window_fraction: float = setting(
        0.2, min=0.01, max=1.0, source="Savitzky-Golay derivative; " + _NO_SOURCE,
        doc="the dV/dt max window as a fraction of the upstroke's 10-90 % rise time",
    )
    dvdt_max_noise_fraction: float = setting(
        0.02, min=0.001, max=1.0, source=_NO_SOURCE,
        doc="on noisy traces the dV/dt max window widens until its noise is this fraction of dV/dt max",
    )
    dvdt_max_min_window_ms: float = setting(
        0.0, unit="ms", min=0.0, max=20.0, source=_NO_SOURCE,
        doc="shortest dV/dt max window (never fewer than 5 samples)",
    )
    dvdt_max_max_window_ms: float = setting(
        10.0, unit="ms", min=0.05, max=50.0, source=_NO_SOURCE,
        doc="longest dV/dt max window",
    )
    mdp_method: str = setting(
        "smoothed_min", choices=("local_fit", "smoothed_min"), source=_NO_SOURCE,
        doc="MDP as the minimum of a quartic fitted around it (robust to noise and hum) or of the smoothed samples",
    )
    mdp_fit_band_mV: float = setting(
        1.0, unit="mV", min=0.05, max=20.0, source=_NO_SOURCE,
        doc="the MDP fit uses the samples within this many mV of the smoothed minimum",
    )
    mdp_smoothing_ms: float = setting(
        10.0, unit="ms", min=0.0, max=100.0, source="Savitzky-Golay smoothing; " + _NO_SOURCE,
        doc="window of the smoothing applied before the minimum is taken for MDP (0: raw samples)",
    )
    apd_crossing_method: str = setting(
        "local_fit", choices=("local_fit", "interpolate"), source=_NO_SOURCE,
        doc="APD crossings: of a quadratic fitted around the crossing (robust to noise and hum) "
        "or of the smoothed samples, interpolated linearly",
    )
    repolarisation_smoothing_ms: float = setting(
        1.0, unit="ms", min=0.0, max=50.0, source="Savitzky-Golay smoothing; " + _NO_SOURCE,
        doc="window of the smoothing applied before the APD level crossings are found (0: raw)",
    )
    min_rise_samples: float = setting(
        10.0, min=2.0, max=1000.0, source="MEASUREMENTS.md (Barr & Spach 1977, from memory)",
        doc="warn when the upstrokes rise 10-90 % in fewer samples than this",
    )


_EVENTS_SOURCE = "analysis.events docstring"


@dataclass(frozen=True)
class QualitySettings(Section):
    """Event and quality flags and the automatic rejection rules (see analysis.events)."""

    key: ClassVar[str] = "quality"

    ead_smooth_ms: float = setting(
        2.0, unit="ms", min=0.0, max=100.0, source="moving average; " + _NO_SOURCE,
        doc="moving-average window of V before EADs are looked for (against noise; keeps short EADs)",
    )
    ead_min_mV: float = setting(
        1.5, unit="mV", min=0.1, max=100.0, source="Cranefield's EAD; Zhang & Qu 2021, Physiol Rep 9:e14883",
        doc="an EAD climbs at least this far above the repolarising trace's running minimum",
    )
    ead_min_dvdt_V_per_s: float = setting(
        0.1, unit="V/s", min=0.0, max=100.0, source="MEASUREMENTS.md: positive dV/dt above a small threshold",
        doc="an EAD's smoothed dV/dt rises above this",
    )
    ead_start_repol_pct: float = setting(
        25.0, unit="%", min=0.0, max=90.0, source=_NO_SOURCE,
        doc="EADs are looked for from this much repolarisation to APD90 (skips a phase-1 notch and dome)",
    )
    dad_smooth_ms: float = setting(
        20.0, unit="ms", min=0.0, max=200.0, source="moving average; " + _NO_SOURCE,
        doc="moving-average window of V before DADs are looked for (20 ms removes 50 Hz hum entirely)",
    )
    dad_min_mV: float = setting(
        1.5, unit="mV", min=0.1, max=50.0, source="MEASUREMENTS.md: 1-5 mV (from memory)",
        doc="a DAD rises and falls back at least this much in diastole without firing",
    )
    pause_factor: float = setting(
        2.0, min=1.1, max=20.0, source="MEASUREMENTS.md: CL > 2x the running median (from memory)",
        doc="a beat whose CL exceeds this many times the running median CL ends a pause",
    )
    pause_median_beats: int = setting(
        9, min=3, max=501, source=_NO_SOURCE,
        doc="beats in the running median of CL (centred on the beat, same sweep)",
    )
    clip_min_flat_ms: float = setting(
        0.5, unit="ms", min=0.0, max=100.0, source=_NO_SOURCE,
        doc="a run this long flat at the converter's limit (or cutting the signal off at the sweep's extreme) is clipping",
    )
    clip_min_samples: int = setting(
        3, min=2, max=1000, source=_NO_SOURCE,
        doc="a clipped run also holds at least this many samples (at low sampling rates)",
    )
    noise_max_mV_rms: float = setting(
        1.0, unit="mV", min=0.0, max=100.0, source="MEASUREMENTS.md: detection is built for 0.1-1 mV rms",
        doc="diastolic noise (rms) above this flags the beat noisy",
    )
    noise_highpass_hz: float = setting(
        20.0, unit="Hz", min=1.0, max=1000.0, source="zero-phase Butterworth; " + _NO_SOURCE,
        doc="diastolic noise is what a low-pass at this corner leaves out (hum and noise, not phase 4)",
    )
    mdp_drift_max_mV: float = setting(
        10.0, unit="mV", min=0.0, max=100.0, source="MEASUREMENTS.md: a set number of mV",
        doc="an MDP farther than this from the first beats' median MDP flags mdp_drift",
    )
    mdp_reference_beats: int = setting(
        10, min=1, max=10_000, source=_NO_SOURCE,
        doc="the first this many beats with an MDP give the reference MDP",
    )
    apa_min_mV: float = setting(
        40.0, unit="mV", min=0.0, max=200.0, source="MEASUREMENTS.md: nodal amplitudes 50-90 mV",
        doc="an APA below this flags low_apa",
    )
    overshoot_min_mV: float = setting(
        0.0, unit="mV", min=-100.0, max=100.0,
        source="MEASUREMENTS.md: central nodal cells peak near 0 mV; a flag, never a rejection",
        doc="a peak below this flags no_overshoot (never rejected automatically)",
    )
    artefact_max_dvdt_V_per_s: float = setting(
        1000.0, unit="V/s", min=1.0, max=100_000.0, source="MEASUREMENTS.md: cells reach 100-500 V/s",
        doc="a detection faster than this is an artefact",
    )
    artefact_min_apd90_ms: float = setting(
        10.0, unit="ms", min=0.0, max=1000.0, source=_NO_SOURCE,
        doc="a detection with an APD90 shorter than this is an artefact",
    )
    reject_artefact: bool = setting(True, source=_EVENTS_SOURCE, doc="reject artefact detections automatically")
    reject_clipped: bool = setting(True, source=_EVENTS_SOURCE, doc="reject clipped beats automatically")
    reject_noisy: bool = setting(False, source=_EVENTS_SOURCE, doc="reject noisy beats automatically")
    reject_low_apa: bool = setting(False, source=_EVENTS_SOURCE, doc="reject low-APA beats automatically")
    reject_mdp_drift: bool = setting(False, source=_EVENTS_SOURCE, doc="reject beats with a drifted MDP automatically")
    reject_ead: bool = setting(False, source=_EVENTS_SOURCE, doc="reject beats with an EAD automatically")
    reject_dad: bool = setting(False, source=_EVENTS_SOURCE, doc="reject beats followed by a DAD automatically")
    reject_pause: bool = setting(False, source=_EVENTS_SOURCE, doc="reject beats that end a pause automatically")


_CELL_TYPE_SOURCE = (
    "MEASUREMENTS.md (from memory); a hint only: Du et al. 2015, Biophys J; Gorospe et al. 2014, "
    "IEEE Trans Biomed Eng 61:2389"
)


@dataclass(frozen=True)
class SummarySettings(Section):
    """How summaries group beats and find the steady state (see analysis.summary)."""

    key: ClassVar[str] = "summary"

    sweep_groups: str = setting(
        "all", choices=("all", "each"), source=_NO_SOURCE,
        doc="summarise all sweeps of a recording together, or each sweep on its own",
    )
    steady_window_s: float = setting(
        60.0, unit="s", min=1.0, max=3600.0, source=_NO_SOURCE,
        doc="length of the rolling window of the steady-state suggestion",
    )
    steady_tolerance_pct_per_min: float = setting(
        3.0, unit="%/min", min=0.01, max=100.0, source=_NO_SOURCE,
        doc="steady when the rolling means of CL and APD90 change by less than this",
    )
    steady_min_beats: int = setting(
        10, min=3, max=100_000, source=_NO_SOURCE,
        doc="fewest beats a steady-state window may hold",
    )
    ensemble: bool = setting(
        True, source=_NO_SOURCE, doc="average the accepted beats aligned at the upstroke and measure the average",
    )
    ventricular_max_ratio: float = setting(
        1.4, min=1.0, max=5.0, source=_CELL_TYPE_SOURCE, doc="ventricular-like when APD90/APD50 is at most this",
    )
    atrial_min_ratio: float = setting(
        1.7, min=1.0, max=5.0, source=_CELL_TYPE_SOURCE, doc="atrial-like when APD90/APD50 is at least this",
    )
    nodal_max_dvdt_V_per_s: float = setting(
        10.0, unit="V/s", min=0.1, max=1000.0, source=_CELL_TYPE_SOURCE,
        doc="nodal-like needs dV/dt max below this (with a depolarised MDP and a steep phase 4)",
    )
    nodal_min_mdp_mV: float = setting(
        -65.0, unit="mV", min=-120.0, max=0.0, source=_CELL_TYPE_SOURCE,
        doc="nodal-like needs an MDP above (less negative than) this",
    )
    nodal_min_ddr_mV_per_s: float = setting(
        20.0, unit="mV/s", min=0.0, max=10_000.0, source=_CELL_TYPE_SOURCE,
        doc="nodal-like needs a DDR above this",
    )


@dataclass(frozen=True)
class Settings:
    """All analysis settings, one frozen section per step.

    Examples
    --------
    >>> s = Settings()
    >>> s.measurement.top_dvdt_V_per_s
    0.5
    >>> s2 = s.replace("measurement.top_method", "dvdt_fraction")
    >>> s2.measurement.top_method, s2.short_hash() != s.short_hash()
    ('dvdt_fraction', True)
    >>> Settings.from_dict(s2.to_dict()) == s2
    True
    """

    preprocess: PreprocessSettings = section(PreprocessSettings)
    detection: DetectionSettings = section(DetectionSettings)
    measurement: MeasurementSettings = section(MeasurementSettings)
    quality: QualitySettings = section(QualitySettings)
    summary: SummarySettings = section(SummarySettings)

    # -- structure ---------------------------------------------------------------------------
    @classmethod
    def sections(cls) -> dict[str, type]:
        """Section key -> section class, in order."""
        hints = typing.get_type_hints(cls)
        return {f.name: hints[f.name] for f in fields(cls)}

    # -- plain data ----------------------------------------------------------------------------
    def to_dict(self) -> dict[str, Any]:
        """Plain JSON/TOML-compatible data: ``{"schema_version": N, section: {field: value}}``.

        Tuples become lists; optional values that are unset are None.
        """
        out: dict[str, Any] = {"schema_version": SCHEMA_VERSION}
        for key in self.sections():
            sec = getattr(self, key)
            out[key] = {
                f.name: list(v) if isinstance(v := getattr(sec, f.name), tuple) else v for f in fields(sec)
            }
        return out

    @classmethod
    def from_dict(cls, data: Mapping[str, Any], *, origin: str | os.PathLike | None = None) -> "Settings":
        """Settings from plain data; missing keys take their defaults.

        Raises
        ------
        SettingsError
            On an unknown section or key, a value of the wrong type, a value out of range or a
            schema version newer than this program's; the message names the key and what is
            allowed.
        """
        where = None if origin is None else os.fspath(origin)
        if not isinstance(data, Mapping):
            raise SettingsError(where, "the settings are not a table of sections", "see docs/settings for the layout")
        version = data.get("schema_version", SCHEMA_VERSION)
        if isinstance(version, bool) or not isinstance(version, int):
            raise SettingsError(where, f"schema_version = {version!r} is not a whole number", f"write schema_version = {SCHEMA_VERSION}")
        if version < 1:
            raise SettingsError(
                where, f"schema_version = {version} is not a settings version Upstroke ever wrote",
                f"write schema_version = {SCHEMA_VERSION} or leave it out",
            )
        if version > SCHEMA_VERSION:
            raise SettingsError(
                where, f"the settings have schema version {version}, newer than this Upstroke's {SCHEMA_VERSION}",
                "update Upstroke or save the settings again with this version",
            )
        sections = cls.sections()
        kwargs = {}
        for key, value in data.items():
            if key == "schema_version":
                continue
            if key not in sections:
                raise SettingsError(where, f"unknown settings section {key!r}", f"use one of: {', '.join(sections)}")
            if not isinstance(value, Mapping):
                raise SettingsError(where, f"settings section {key!r} is not a table", f"write it as [{key}]")
        for key, sec_cls in sections.items():
            given = dict(data.get(key, {}))
            names = [f.name for f in fields(sec_cls)]
            unknown = sorted(set(given) - set(names))
            if unknown:
                raise SettingsError(where, f"unknown setting {key}.{unknown[0]}", _name_hint(unknown[0], names, key))
            obj = object.__new__(sec_cls)
            defaults = sec_cls()
            for name in names:
                object.__setattr__(obj, name, given.get(name, getattr(defaults, name)))
            obj._validate(where)
            kwargs[key] = obj
        return cls(**kwargs)

    # -- edits -----------------------------------------------------------------------------------
    def replace(self, path: str, value: Any) -> "Settings":
        """A copy with one field changed, given as ``"section.field"``; validated."""
        return self.updated({path: value})

    def updated(self, changes: Mapping[str, Any]) -> "Settings":
        """A copy with several ``"section.field": value`` changes; validated."""
        data = self.to_dict()
        for path, value in changes.items():
            key, _, name = path.partition(".")
            if key not in data or key == "schema_version" or not name:
                raise SettingsError(None, f"unknown setting {path!r}", f"use section.field, sections: {', '.join(self.sections())}")
            if name not in data[key]:
                raise SettingsError(None, f"unknown setting {path!r}", _name_hint(name, list(data[key]), key))
            data[key][name] = list(value) if isinstance(value, tuple) else value
        return Settings.from_dict(data)

    def get(self, path: str) -> Any:
        """The value of ``"section.field"``."""
        key, _, name = path.partition(".")
        try:
            return getattr(getattr(self, key), name)
        except AttributeError:
            raise SettingsError(None, f"unknown setting {path!r}", "use section.field") from None

    # -- identity --------------------------------------------------------------------------------
    def to_json(self) -> str:
        """Canonical JSON text (sorted keys, no spaces): stored with results, hashed."""
        return json.dumps(self.to_dict(), sort_keys=True, separators=(",", ":"), allow_nan=False)

    def short_hash(self) -> str:
        """The first 10 hex digits of the SHA-256 of :meth:`to_json`: equal settings, equal hash."""
        return hashlib.sha256(self.to_json().encode("utf-8")).hexdigest()[:10]


def describe() -> list[FieldInfo]:
    """Metadata of every field of every section, in order (for forms, tooltips and docs)."""
    out: list[FieldInfo] = []
    for sec_cls in Settings.sections().values():
        out.extend(sec_cls.field_infos())
    return out


def _check_declarations() -> None:
    # TOML has no null, so an optional field written as "absent" must mean its default.
    for info in describe():
        if info.kind == "optional float" and info.default is not None:
            raise TypeError(f"{info.path}: an optional setting must default to None")


_check_declarations()


# The TOML files: defined in their own module, part of this module's interface.
def _name_hint(name: str, names: list[str], section_name: str) -> str:
    """A short fix for a mistyped setting: the closest names, not all of them (keeps one line)."""
    import difflib

    close = difflib.get_close_matches(str(name), names, n=3, cutoff=0.5)
    if close:
        return f"did you mean {' or '.join(close)}? (docs/measurements.md lists every {section_name} setting)"
    return f"the {section_name} section has {len(names)} settings, listed in docs/measurements.md"


from .settings_io import load_settings, save_settings  # noqa: E402
