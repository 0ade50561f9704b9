"""Beat detection and every per-beat measurement: upstroke, take-off, extrema, repolarisation, markers, features, phases.

The modules below are private to this package; import from here."""


from analysis.beats._detect import Detection, detect_beats, detect_sweep, estimate_noise_mV, ARTEFACT_REASONS
from analysis.beats._diastolic_noise import lowpass_residual_rms, residual_rms_many
from analysis.beats._extrema import mdp_batch, peak_batch
from analysis.beats._features import Feature, FEATURES, FLAG_WORDS, features_of_sweep, marker_columns
from analysis.beats._mdp_time import FIRST_BEAT_FALL_MV, mdp_vertex_times, recorded_diastole
from analysis.beats._markers import BeatMarkers, measure_beats, apd_name, MARKER_FIELDS
from analysis.beats._phases import PhaseSpans, phase_spans, phase1_end_s, PLATEAU_MAX_APD90_OVER_APD50
from analysis.beats._repolarisation import first_crossings, first_crossings_one, refine_crossings, refine_crossing_one
from analysis.beats._spikes import find_spikes, bridge_spans
from analysis.beats._takeoff import TakeoffSteps
from analysis.beats._upstroke import TOP_FIT_NOISE, UpstrokeVelocity, derivative_trace, rise_time_10_90, upstroke_velocity

__all__ = ["ARTEFACT_REASONS", "BeatMarkers", "Detection", "FEATURES", "FIRST_BEAT_FALL_MV", "FLAG_WORDS", "Feature", "MARKER_FIELDS", "PLATEAU_MAX_APD90_OVER_APD50", "PhaseSpans", "TOP_FIT_NOISE", "TakeoffSteps", "UpstrokeVelocity", "apd_name", "bridge_spans", "derivative_trace", "detect_beats", "detect_sweep", "estimate_noise_mV", "features_of_sweep", "find_spikes", "first_crossings", "first_crossings_one", "lowpass_residual_rms", "marker_columns", "mdp_batch", "mdp_vertex_times", "recorded_diastole", "measure_beats", "peak_batch", "phase1_end_s", "phase_spans", "refine_crossing_one", "refine_crossings", "residual_rms_many", "rise_time_10_90", "upstroke_velocity"]
