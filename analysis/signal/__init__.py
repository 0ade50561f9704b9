"""Signal conditioning with no notion of a beat: derivatives, smoothing, filters, mains hum, small fits.

The modules below are private to this package; import from here."""


from analysis.signal._filters import window_samples, savgol_coeffs, cached_savgol_coeffs, savgol_smooth, savgol_smooth_interior, least_squares_slope, moving_mean, savgol_derivative, central_difference, lowpass, notch, correct_ljp, noise_rms_mV, slope_noise_V_per_s, noise_matched_window_ms
from analysis.signal._fits import quadratic_fit, quadratic_from_sums, RunningSums, poly_lsq, poly_lsq_centred, parabolic_peak, top_fit_peak
from analysis.signal._hum import HumSurvey, hum_survey, remove_hum, hum_present, hum_pad_samples
from analysis.signal._preprocess import filter_pad_samples, preprocess

__all__ = ["HumSurvey", "RunningSums", "cached_savgol_coeffs", "central_difference", "correct_ljp", "filter_pad_samples", "hum_pad_samples", "hum_present", "hum_survey", "least_squares_slope", "lowpass", "moving_mean", "noise_matched_window_ms", "noise_rms_mV", "notch", "parabolic_peak", "poly_lsq", "poly_lsq_centred", "preprocess", "quadratic_fit", "quadratic_from_sums", "remove_hum", "savgol_coeffs", "savgol_derivative", "savgol_smooth", "savgol_smooth_interior", "slope_noise_V_per_s", "top_fit_peak", "window_samples"]
