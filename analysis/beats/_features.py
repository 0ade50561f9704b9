"""Per-beat parameters: markers found on the trace, then columns through a feature registry.

Measurement has two stages:

1. :func:`measure_beats` finds each beat's markers on the trace (a loop over beats; each step
   works on that beat's own samples): dV/dt max and its time, the peak, the MDP, the take-off,
   the phase-4 fits and the APD level crossings. Definitions are MEASUREMENTS.md's defaults or the
   alternatives chosen in :class:`analysis.settings.MeasurementSettings` (see
   :mod:`analysis.beats._markers` for each one).
2. :data:`FEATURES`, the registry of compute functions, one per measured column of the catalogue
   :mod:`analysis.columns` (which holds each column's name, unit, description and published
   source), turns the markers of one sweep into table columns, vectorised.

Undefined values are NaN. The first beat of a sweep has no preceding diastole: its MDP, TOP, DDR,
APA, APDs and CL are NaN and it carries ``no_diastole``; a beat whose repolarisation the sweep's
end cuts off carries ``truncated``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Mapping

import numpy as np

from analysis.beats._markers import BeatMarkers, apd_name
from analysis.columns import CSV_APD_PERCENTS, BeatColumn, apd_column, column
from analysis.settings import MeasurementSettings

__all__ = ["Feature", "FEATURES", "FLAG_WORDS", "features_of_sweep", "marker_columns"]

#: Flags this module sets (the events module adds its own).
FLAG_WORDS = {
    "no_diastole": "first beat of its sweep: no preceding diastole, so no MDP, TOP, DDR, APA, APD or CL",
    "no_phase4": "no diastolic depolarisation above the noise before the upstroke (a paced or evoked action "
                 "potential, a driven quiescent cell, a neuron-like spike): TOP, DDR and DDR100 left empty",
    "truncated": "the sweep ends before the beat has repolarised (APDs cut off), or during its upstroke",
}


@dataclass(frozen=True)
class Feature:
    """One measured column: its catalogue record and the function that computes it.

    The name, unit, description and published source are the catalogue's
    (:mod:`analysis.columns`); the registry adds only the algorithm.

    Attributes
    ----------
    column : BeatColumn
        The column's record in the catalogue.
    compute : callable
        ``compute(markers, settings) -> ndarray`` over the beats of one sweep, in order.
    """

    column: BeatColumn
    compute: Callable[[Mapping[str, np.ndarray], MeasurementSettings], np.ndarray]

    @property
    def name(self) -> str:
        return self.column.name

    @property
    def unit(self) -> str:
        return self.column.unit

    @property
    def description(self) -> str:
        return self.column.description

    @property
    def source(self) -> str:
        return self.column.source


def _col(name: str) -> Callable[[Mapping[str, np.ndarray], MeasurementSettings], np.ndarray]:
    return lambda m, s: np.asarray(m[name], dtype=np.float64)


def _cl(m: Mapping[str, np.ndarray], s: MeasurementSettings) -> np.ndarray:
    t = np.asarray(m["t_upstroke_s"], dtype=np.float64)
    out = np.full(t.shape, np.nan)
    if "previous_row" in m:
        # The previous beat of the chain (artefact-like detections are not beats).
        prev = np.asarray(m["previous_row"], np.int64)
        has = prev >= 0
        out[has] = (t[has] - t[prev[has]]) * 1e3
    elif t.size > 1:
        out[1:] = np.diff(t) * 1e3
    # A beat without a measured predecessor in the same continuous sweep has no cycle length.
    out[~np.asarray(m["has_previous"], bool)] = np.nan
    return out


def _rate(m: Mapping[str, np.ndarray], s: MeasurementSettings) -> np.ndarray:
    cl = _cl(m, s)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(cl > 0, 60000.0 / cl, np.nan)


def _apa(m: Mapping[str, np.ndarray], s: MeasurementSettings) -> np.ndarray:
    return np.asarray(m["peak_mV"], float) - np.asarray(m["mdp_mV"], float)


def _apd(pct: float) -> Callable[[Mapping[str, np.ndarray], MeasurementSettings], np.ndarray]:
    def f(m: Mapping[str, np.ndarray], s: MeasurementSettings) -> np.ndarray:
        ref = {"dvdt_max": "t_dvdt_max_s", "top": "t_top_s", "peak": "t_peak_s"}[s.apd_reference]
        return (np.asarray(m[f"t_{apd_name(pct)}_s"], float) - np.asarray(m[ref], float)) * 1e3
    return f


#: The registry of measured columns of the beats CSV (APD columns follow the settings): each
#: column's compute function, by the column's name in the catalogue.
FEATURES: dict[str, Feature] = {
    name: Feature(column(name), compute)
    for name, compute in (
        ("t_upstroke_s", _col("t_upstroke_s")),
        ("cl_ms", _cl),
        ("rate_bpm", _rate),
        ("mdp_mV", _col("mdp_mV")),
        ("top_mV", _col("top_mV")),
        ("ddr_mV_per_s", _col("ddr_mV_per_s")),
        ("ddr100_mV_per_s", _col("ddr100_mV_per_s")),
        ("dvdt_max_V_per_s", _col("dvdt_max_V_per_s")),
        ("peak_mV", _col("peak_mV")),
        ("apa_mV", _apa),
    )
}


def apd_features(percents) -> list[Feature]:
    """One APD feature per repolarisation percentage of the settings."""
    return [Feature(apd_column(p), _apd(p)) for p in percents]


def marker_columns(percents) -> tuple[str, ...]:
    """The extra (non-CSV) columns measure adds to the beat table."""
    return (
        "i_upstroke", "t_mdp_s", "t_top_s", "t_peak_s",
        *(f"t_{apd_name(p)}_s" for p in sorted(set(percents) | set(CSV_APD_PERCENTS))),
        "rise_ms", "dvdt_window_ms", "dvdt_max_sd_V_per_s", "dvdt_peak_width_ms", "ddr_early_mV_per_s", "ddr_late_mV_per_s", "ddr_tau_ms", "ddr_vinf_mV",
    )


def features_of_sweep(markers: BeatMarkers | Mapping[str, np.ndarray], settings: MeasurementSettings) -> dict[str, np.ndarray]:
    """The measured columns of one sweep's beats, from their markers, through the registry.

    ``markers`` may hold ``previous_row``, each beat's previous beat in the chain (-1: none);
    by default it is the row before.

    The CSV's APD columns (20, 50 and 90 %) are always present (NaN when the settings leave them
    out); other percentages add their own columns.
    """
    m = markers.columns() if isinstance(markers, BeatMarkers) else markers
    out = {name: f.compute(m, settings) for name, f in FEATURES.items()}
    for f in apd_features(settings.apd_percent):
        out[f.name] = f.compute(m, settings)
    n = len(m["t_upstroke_s"])
    for p in CSV_APD_PERCENTS:
        out.setdefault(f"{apd_name(p)}_ms", np.full(n, np.nan))
    # APA and APDs need a diastole.
    nod = ~np.asarray(m["has_previous"], bool)
    for name in ["apa_mV", *[k for k in out if k.startswith("apd")]]:
        out[name] = np.where(nod, np.nan, out[name])
    return out
