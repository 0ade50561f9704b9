"""Preprocessing of a sweep or chunk before detection: LJP, mains hum, notch and low-pass.

The order is fixed: the liquid-junction correction first (Barry & Lynch 1991, J Membr Biol
121:101), then the hum subtraction (:mod:`analysis.signal._hum`), then the optional notch and
low-pass filters of :mod:`analysis.signal._filters`.
"""

from __future__ import annotations

import math

import numpy as np

from analysis.signal._filters import lowpass, notch
from analysis.signal._hum import hum_pad_samples, remove_hum

__all__ = ["filter_pad_samples", "preprocess"]


def filter_pad_samples(fs_hz: float, settings) -> int:
    """Samples of context a chunk needs on each side so that the filters' edges do not show."""
    pad_s = 0.0
    if getattr(settings, "hum_removal", "off") != "off":
        pad_s = hum_pad_samples(fs_hz, settings.hum_block_s) / fs_hz
    if settings.lowpass_hz:
        pad_s = max(pad_s, 10.0 * settings.lowpass_order / settings.lowpass_hz)
    if settings.notch_hz:
        # The notch's impulse response decays as exp(-pi f t / Q); 8 time constants.
        pad_s = max(pad_s, 8.0 * settings.notch_q / (math.pi * settings.notch_hz))
    return int(math.ceil(pad_s * fs_hz))


def preprocess(v_mV: np.ndarray, fs_hz: float, settings, *, offset: int = 0, hum=None) -> np.ndarray:
    """LJP correction, mains-hum removal, then the optional notch and low-pass.

    ``settings`` is a preprocess settings section; ``offset`` is the index of ``v_mV[0]`` in its
    sweep (the hum's phase is measured from the sweep's start); ``hum`` is the sweep's
    :class:`analysis.signal.HumSurvey` (:func:`analysis.signal.hum_survey` on the whole sweep), False
    for none, or None to judge it on ``v_mV`` itself.
    """
    # The caller's samples are a fresh read: without an LJP they need no copy.
    x = np.asarray(v_mV, dtype=np.float64) - settings.ljp_mV if settings.ljp_mV else np.asarray(v_mV, dtype=np.float64)
    if getattr(settings, "hum_removal", "off") != "off" and hum is not False:
        x, _ = remove_hum(
            x, fs_hz, block_s=settings.hum_block_s, min_mV=settings.hum_min_mV, offset=offset, present=hum,
        )
    if settings.notch_hz:
        x = notch(x, fs_hz, mains_hz=settings.notch_hz, q=settings.notch_q, harmonics=settings.notch_harmonics)
    if settings.lowpass_hz:
        x = lowpass(x, fs_hz, cutoff_hz=settings.lowpass_hz, order=settings.lowpass_order)
    return x
