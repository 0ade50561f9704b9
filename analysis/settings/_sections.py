"""The settings sections: what each step of the analysis reads, with units, bounds and sources.

One frozen dataclass per step (``preprocess``, ``detection``, ``measurement``, ``quality``,
``summary``), each field declared with :func:`analysis.settings.setting`. They are put
together, validated as a whole, stored and hashed by :class:`analysis.settings.Settings`, which
re-exports them.
"""

from dataclasses import dataclass
from typing import ClassVar

from analysis.columns import FLAG_VOCABULARY
from analysis.settings._fields import Section, setting

__all__ = [
    "PreprocessSettings",
    "DetectionSettings",
    "MeasurementSettings",
    "QualitySettings",
    "SummarySettings",
    "TOP_METHODS",
    "DDR_METHODS",
    "APD_REFERENCES",
    "UPSTROKE_TIME_METHODS",
    "DVDT_MAX_METHODS",
]

_LJP_SOURCE = "Barry & Lynch 1991, J Membr Biol 121:101; Neher 1992, Methods Enzymol 207:123"
_NO_SOURCE = "common practice, no source"
#: The flags that hold a beat for review by default: those that say a value may be wrong.
REVIEW_FLAGS = ("clipped", "noisy", "mdp_drift", "low_apa", "artefact")


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
    """How beats are found in a sweep (see analysis.beats._detect)."""

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
        doc="long sweeps are worked in chunks of this length, rounded up to whole level windows "
        "(bounds memory; the results do not depend on it)",
    )
    chunk_overlap_s: float = setting(
        4.0, unit="s", min=0.1, max=600.0, source=_NO_SOURCE,
        doc="context read on each side of a chunk, rounded up to whole level windows; must exceed the "
        "longest cycle expected (reading costs grow with 1 + 2 x overlap / chunk)",
    )


TOP_METHODS = ("dvdt_criterion", "dvdt_fraction", "d2v_max", "linear_fits")
DDR_METHODS = ("linear", "early_late", "exponential")
APD_REFERENCES = ("dvdt_max", "top", "peak")
UPSTROKE_TIME_METHODS = ("dvdt_max", "voltage_level")
DVDT_MAX_METHODS = ("adaptive_savgol", "central_difference")


@dataclass(frozen=True)
class MeasurementSettings(Section):
    """Which published definition each per-beat parameter uses (see analysis.beats._features)."""

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
    no_phase4_min_mV: float = setting(
        1.0, unit="mV", min=0.0, max=20.0, source=_NO_SOURCE,
        doc="a beat whose take-off lies less than this (or 4 x the noise rms) above its MDP has no phase 4 "
            "(flag no_phase4, no TOP or DDR); 0: never",
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
    mdp_time_method: str = setting(
        "two_sided_fit", choices=("two_sided_fit", "minimum"), source=_NO_SOURCE,
        doc="MDP time: the vertex of a parabola with its own curvature on each side, fitted to the trough "
            "within mdp_fit_band_mV (or a noise-scaled band) of the MDP; or the smoothed minimum itself",
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


_EVENTS_SOURCE = "analysis.flags._events docstring"


@dataclass(frozen=True)
class QualitySettings(Section):
    """Event and quality flags and the automatic rejection rules (see analysis.flags._events)."""

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
    review_flags: tuple[str, ...] = setting(
        REVIEW_FLAGS, choices=FLAG_VOCABULARY, source=_NO_SOURCE,
        doc="flags that hold a beat out of the summaries until the user accepts or rejects it "
        "(artefact-type flags: the values may be wrong; EAD, DAD and pause are physiology and keep the beat in)",
    )


_CELL_TYPE_SOURCE = (
    "MEASUREMENTS.md (from memory); a hint only: Du et al. 2015, Biophys J; Gorospe et al. 2014, "
    "IEEE Trans Biomed Eng 61:2389"
)


@dataclass(frozen=True)
class SummarySettings(Section):
    """How summaries group beats and find the steady state (see analysis.stats._summary)."""

    key: ClassVar[str] = "summary"
    # A cell cannot be both: the ventricular-like ratios end below where the atrial-like begin.
    order: ClassVar[tuple[tuple[str, str, str], ...]] = (("ventricular_max_ratio", "<", "atrial_min_ratio"),)

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
