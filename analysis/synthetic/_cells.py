"""Synthetic recordings of beating cells with known truth, for tests, benchmarks and the demo.

The cell is a smooth parametric waveform with an exact derivative (:mod:`analysis.synthetic._model`):
phase-4 diastolic depolarisation from the MDP toward the take-off potential, an upstroke with a set
dV/dt max, a peak, an optional phase-1 notch and phase-2 plateau, and phase 3 back to the next MDP
with a set APD90. The recording adds what an amplifier and a rig add: white noise, 50/60 Hz hum,
slow drift, short electrical artefacts and stretches of seal trouble (declared and planted in
:mod:`analysis.synthetic._events`). Every per-beat parameter's true value, by MEASUREMENTS.md's
definitions, is computed on the exact waveform (:mod:`analysis.synthetic._truth`), and returned
with the recording.

Examples
--------
>>> from analysis.synthetic._cells import preset, synthesize
>>> syn = synthesize(preset("nodal-like"), duration_s=5.0, fs_hz=10_000.0, seed=1)
>>> syn.recording.sampling_rate_hz, syn.recording.units(0)
(10000.0, 'mV')
>>> round(float(syn.truth.beats["mdp_mV"][1]), 1)
-61.7
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from functools import cached_property
from typing import Sequence

import numpy as np

from analysis.recording import CURRENT_CLAMP, Channel, Recording
from analysis.synthetic._events import (
    DAD,
    EAD,
    Artefact,
    Pause,
    SealTrouble,
    Stretch,
    event_table,
    plant_events,
    stretch_factors,
)
from analysis.synthetic._model import BeatTrain, Bump, RepolarisationShape, smooth_window
from analysis.synthetic._truth import beat_truth
from analysis.table import BeatTable

__all__ = ["CellParams", "PRESETS", "Synthetic", "Truth", "preset", "synthesize"]


@dataclass(frozen=True)
class CellParams:
    """What a synthetic cell is set to do (means; the rhythm varies beat to beat by ``cl_sd_ms``).

    Attributes
    ----------
    name : str
    cl_ms, cl_sd_ms : float
        Mean cycle length and its beat-to-beat standard deviation (normal, clipped at 3 SD).
    mdp_mV, top_mV, peak_mV : float
        Maximum diastolic potential, take-off potential (placed for the 0.5 V/s criterion) and
        peak. Met exactly on a clean recording.
    dvdt_max_V_per_s : float
        Maximum upstroke velocity (exact).
    apd90_ms : float
        APD90 from the time of dV/dt max (exact); APD50 and APD20 follow from the shape.
    upstroke_fraction : float
        Where in the rise from TOP to peak dV/dt is largest (0.4: 40 % of the way up).
    phase4_onset_ms : float or None
        Time constant with which the diastolic slope builds up after the MDP; None (default)
        matches the curvature of the repolarisation arriving there, so that the MDP is a
        smooth minimum (continuous d2V/dt2).
    foot_ms, foot_dvdt_V_per_s : float
        An optional slow foot (width and the slope it adds at the upstroke): late diastole that
        accelerates over tens of ms, as in nodal cells. ``foot_ms=0`` leaves it out.
    repolarisation : tuple of Bump
        The repolarisation's shape (notch, plateau, phase 3, tail), in shares of the fall.

    Notes
    -----
    The diastolic depolarisation rate is not set directly: it is what MDP, TOP and the diastole
    that the cycle length leaves make of it (``ddr_mV_per_s`` in the truth). A :class:`Stretch`
    with a ``phase4_factor`` changes it, and the cycle length follows, as a rate-slowing drug
    would.
    """

    name: str
    cl_ms: float
    cl_sd_ms: float
    mdp_mV: float
    top_mV: float
    dvdt_max_V_per_s: float
    peak_mV: float
    apd90_ms: float
    repolarisation: tuple[Bump, ...]
    upstroke_fraction: float = 0.4
    phase4_onset_ms: float | None = None
    foot_ms: float = 0.0
    foot_dvdt_V_per_s: float = 0.0

    def replace(self, **changes: object) -> "CellParams":
        """A copy with some fields changed."""
        return dataclasses.replace(self, **changes)


#: Presets with plausible values (MEASUREMENTS.md, reference table; sources beside each value).
PRESETS: dict[str, CellParams] = {
    # Human SAN myocytes: CL 828 ms, MDP -61.7 mV, dV/dt max 4.6 V/s (Verkerk et al. 2007, Eur
    # Heart J 28:2472); APA about 80 mV and APD50 about 108 ms as in the rabbit SAN model of Severi
    # et al. 2012 (J Physiol 590:4483); threshold near -40 mV (common practice, no source).
    "nodal-like": CellParams(
        name="nodal-like", cl_ms=828.0, cl_sd_ms=12.0, mdp_mV=-61.7, top_mV=-44.0,
        dvdt_max_V_per_s=4.6, peak_mV=17.0, apd90_ms=165.0, foot_ms=20.0, foot_dvdt_V_per_s=0.25,
        # dV/dt max near -9 mV, where the dV/dt peak is about as curved after as before
        upstroke_fraction=0.57,
        repolarisation=(Bump(0.9, 0.0, 0.85), Bump(0.1, 0.45, 1.0, "tail")),
    ),
    # Atrial-like stem-cell-derived cells: triangular action potential, APD90/APD50 >= 1.7 (the
    # cell-type hint's threshold in MEASUREMENTS.md, from memory); other values plausible only.
    "atrial-like": CellParams(
        name="atrial-like", cl_ms=1000.0, cl_sd_ms=15.0, mdp_mV=-72.0, top_mV=-62.0,
        dvdt_max_V_per_s=90.0, peak_mV=25.0, apd90_ms=180.0,
        repolarisation=(Bump(0.3, 0.0, 0.35), Bump(0.5, 0.1, 0.8), Bump(0.2, 0.4, 1.0, "tail")),
    ),
    # Adult human ventricle: MDP about -90 mV, dV/dt max 254-303 V/s, APD 228-259 ms (review table
    # of PSC-CM vs adult values, from memory); spontaneous, so a little depolarised (-85 mV).
    "ventricular-like": CellParams(
        name="ventricular-like", cl_ms=1200.0, cl_sd_ms=15.0, mdp_mV=-85.0, top_mV=-72.0,
        dvdt_max_V_per_s=260.0, peak_mV=35.0, apd90_ms=245.0,
        repolarisation=(
            Bump(0.08, 0.0, 0.03), Bump(0.12, 0.02, 0.55), Bump(0.68, 0.45, 0.82),
            Bump(0.12, 0.55, 1.0, "tail"),
        ),
    ),
    # Purkinje-like: MDP -80 to -90 mV, dV/dt max 100-500 V/s (MEASUREMENTS.md, Beats); a
    # spike-and-dome notch and a long plateau (common practice, no source).
    "purkinje-like": CellParams(
        name="purkinje-like", cl_ms=1600.0, cl_sd_ms=20.0, mdp_mV=-88.0, top_mV=-76.0,
        dvdt_max_V_per_s=400.0, peak_mV=32.0, apd90_ms=320.0,
        repolarisation=(
            Bump(0.2, 0.0, 0.025), Bump(-0.03, 0.02, 0.06), Bump(0.1, 0.05, 0.6),
            Bump(0.63, 0.5, 0.82), Bump(0.1, 0.65, 1.0, "tail"),
        ),
    ),
}


def preset(name: str, **changes: object) -> CellParams:
    """A preset cell (``nodal-like``, ``atrial-like``, ``ventricular-like``, ``purkinje-like``)."""
    try:
        base = PRESETS[name]
    except KeyError:
        raise ValueError(f"no preset {name!r}; choose one of {', '.join(PRESETS)}") from None
    return base.replace(**changes) if changes else base


@dataclass(frozen=True)
class Truth:
    """What is known about a synthetic recording.

    Attributes
    ----------
    beats : BeatTable
        One row per beat with the beats CSV's measured columns, marker times (``t_mdp_s`` ...),
        ``flags`` and ``train_beat``; NaN where the definition leaves a value undefined.
    events : BeatTable
        Planted events: ``kind`` (``artefact``, ``dad``, ``ead``, ``pause``, ``seal``), ``sweep``,
        ``t_s`` (artefact time; DAD peak; EAD take-off, where dV/dt turns positive; upstroke
        ending a pause; start of seal trouble), ``stop_s`` (end of seal trouble, else NaN),
        ``beat`` (train beat it belongs to, -1 for none) and ``amplitude_mV``.
    """

    beats: BeatTable
    events: BeatTable

    def times(self, kind: str) -> np.ndarray:
        """Times (s) of the planted events of one kind."""
        return self.events["t_s"][self.events["kind"] == kind]


class Synthetic:
    """A synthetic recording, its truth and the waveform that made both.

    Attributes
    ----------
    recording : Recording
    truth : Truth
        Computed on first use (a 30-minute recording's truth takes a few seconds).
    train : BeatTrain
        The exact waveform: ``train.evaluate(t_s)`` gives V (mV) and dV/dt (mV/s).
    cell : CellParams
    sweep_starts_s : tuple of float
        Each sweep's start on the train's clock.
    """

    def __init__(self, recording: Recording, train: BeatTrain, cell: CellParams, sweep_starts_s, duration_s,
                 planted, artefacts, pauses, seal_troubles) -> None:
        self.recording = recording
        self.train = train
        self.cell = cell
        self.sweep_starts_s = tuple(sweep_starts_s)
        self._duration_s = duration_s
        self._planted = (planted, tuple(artefacts), tuple(pauses), tuple(seal_troubles))

    @cached_property
    def truth(self) -> Truth:
        beats = BeatTable.concat(
            [
                beat_truth(self.train, start_s=t0, stop_s=t0 + self._duration_s, sweep=i)
                for i, t0 in enumerate(self.sweep_starts_s)
            ]
        )
        events = event_table(self.train, *self._planted, self.sweep_starts_s, self._duration_s)
        return Truth(beats, events)


_CHUNK = 1 << 20


def _build_train(
    cell: CellParams, cl_s: np.ndarray, apd_extra_s: np.ndarray, stretches, drift_mV_per_s, shunts, start_phase,
) -> BeatTrain:
    n = len(cl_s)
    common = dict(
        cl_s=cl_s, mdp_mV=np.full(n + 1, cell.mdp_mV), top_mV=np.full(n, cell.top_mV),
        peak_mV=np.full(n, cell.peak_mV), dvdt_max_mV_per_s=np.full(n, cell.dvdt_max_V_per_s * 1000.0),
        upstroke_fraction=cell.upstroke_fraction, phase4_onset_s=None if cell.phase4_onset_ms is None else cell.phase4_onset_ms / 1000.0,
        shape=RepolarisationShape(cell.repolarisation), foot_s=cell.foot_ms / 1000.0,
        foot_dvdt_mV_per_s=cell.foot_dvdt_V_per_s * 1000.0, drift_mV_per_s=drift_mV_per_s, shunts=shunts,
    )
    apd90_s = cell.apd90_ms / 1000.0
    t_first = 0.0
    t_up = np.cumsum(cl_s)
    # A stretch acts on beats by their time, and their time depends on the stretch: a few rounds
    # of fixed-point iteration settle it (stretches change slowly compared with one cycle). The
    # first round also finds the first diastole, which start_phase cuts into.
    for _ in range(5 if stretches else 1):
        p4, apd = stretch_factors(stretches, t_up)
        train = BeatTrain(t_first_mdp_s=t_first, phase4_factor=p4, apd90_s=apd90_s * apd + apd_extra_s, **common)
        shift = -start_phase * train.t4_s[0] - t_first
        t_first += shift
        t_up = train.t_up_s + shift
    p4, apd = stretch_factors(stretches, t_up)
    return BeatTrain(t_first_mdp_s=t_first, phase4_factor=p4, apd90_s=apd90_s * apd + apd_extra_s, **common)


def synthesize(
    cell: CellParams,
    *,
    duration_s: float,
    fs_hz: float = 20_000.0,
    seed: int = 0,
    noise_mV: float = 0.0,
    hum_mV: float = 0.0,
    hum_hz: float = 50.0,
    drift_mV_per_min: float = 0.0,
    artefacts: Sequence[Artefact] = (),
    dads: Sequence[DAD] = (),
    eads: Sequence[EAD] = (),
    pauses: Sequence[Pause] = (),
    stretches: Sequence[Stretch] = (),
    seal_troubles: Sequence[SealTrouble] = (),
    n_sweeps: int = 1,
    sweep_gap_s: float = 0.0,
    start_phase: float = 0.5,
) -> Synthetic:
    """A recording of a synthetic cell, with the true value of every beat's parameters.

    Parameters
    ----------
    cell : CellParams
        The cell (see :data:`PRESETS` and :func:`preset`).
    duration_s : float
        Length of each sweep.
    fs_hz : float
        Sampling rate. The waveform is sampled at the sample times (no anti-alias filter).
    seed : int
        Seeds the rhythm's variability, the noise and the hum's phase; the same seed gives the
        same samples bit for bit.
    noise_mV : float
        White Gaussian noise, rms.
    hum_mV, hum_hz : float
        Mains hum: a sinusoid of this amplitude (peak, mV) and frequency.
    drift_mV_per_min : float
        Linear baseline drift.
    artefacts, dads, eads, pauses, stretches, seal_troubles : sequences
        Planted events (:class:`Artefact`, :class:`DAD`, :class:`EAD`, :class:`Pause`,
        :class:`Stretch`, :class:`SealTrouble`). Beats count from the recording's first upstroke
        across all sweeps; stretch and seal-trouble times are from the start of sweep 0;
        artefact times are in their own sweep.
    n_sweeps, sweep_gap_s : int, float
        Episodic recording: sweeps of ``duration_s`` separated by unrecorded gaps while the cell
        keeps beating. One sweep is a gap-free recording.
    start_phase : float
        How far into the first beat's diastole the recording starts (0 at its MDP, 1 at its
        upstroke).

    Returns
    -------
    Synthetic
        ``recording`` (one current-clamp channel ``Vm`` in mV), ``truth`` (:class:`Truth`),
        ``train`` (the exact waveform: ``train.evaluate(t_s)`` gives V and dV/dt), ``cell``.

    Raises
    ------
    ValueError
        When the parameters cannot make a beat (for example TOP below MDP, or an APD longer than
        the cycle leaves room for).
    """
    if duration_s <= 0 or fs_hz <= 0 or n_sweeps < 1:
        raise ValueError("duration_s, fs_hz and n_sweeps must be positive")
    if not (0.0 <= start_phase < 1.0):
        raise ValueError("start_phase must be in [0, 1)")
    rhythm_rng, noise_rng, hum_rng = (np.random.default_rng(s) for s in np.random.SeedSequence(seed).spawn(3))
    span = n_sweeps * duration_s + (n_sweeps - 1) * sweep_gap_s
    shunts = tuple(
        (s.start_s, s.stop_s, s.ramp_s, s.depolarisation_mV / abs(cell.mdp_mV)) for s in seal_troubles
    )
    slowest = min([1.0] + [s.phase4_factor for s in stretches])
    fastest = max([1.0] + [s.phase4_factor for s in stretches])
    n = int(span / max(cell.cl_ms - 3 * cell.cl_sd_ms, 1.0) * 1000.0 * fastest) + 4
    while True:
        # One long draw, cut to length, so that a longer recording starts with the same rhythm.
        jitter = np.clip(rhythm_rng.standard_normal(n), -3.0, 3.0)
        rhythm_rng = np.random.default_rng(np.random.SeedSequence(seed).spawn(3)[0])
        cl_s = (cell.cl_ms + cell.cl_sd_ms * jitter) / 1000.0
        for p in pauses:
            if not (0 < p.beat < n):
                raise ValueError(f"a pause needs a beat after the first, not {p.beat}")
            cl_s[p.beat] *= p.factor
        apd_extra_s = np.zeros(n)
        for e in eads:
            if not (0 <= e.beat < n):
                raise ValueError(f"no beat {e.beat} in this train")
            apd_extra_s[e.beat] += e.prolong_ms / 1000.0
        train = _build_train(cell, cl_s, apd_extra_s, tuple(stretches), drift_mV_per_min / 60.0, shunts, start_phase)
        if train.t_mdp_s[-1] > span + 1.0:
            break
        n = int(n * 1.5 / slowest) + 4
    planted = plant_events(train, dads, eads)

    n_samples = int(round(duration_s * fs_hz))
    starts = [i * (duration_s + sweep_gap_s) for i in range(n_sweeps)]
    data = np.empty((n_sweeps, n_samples))
    hum_phase = hum_rng.uniform(0.0, 2.0 * np.pi)
    for i, t0 in enumerate(starts):
        for j in range(0, n_samples, _CHUNK):
            t = t0 + np.arange(j, min(n_samples, j + _CHUNK)) / fs_hz
            v = train.evaluate(t, derivative=False, assume_sorted=True)[0]
            sd = np.full_like(t, noise_mV)
            for s in seal_troubles:
                sd = np.hypot(sd, s.noise_mV * smooth_window(t, s.start_s, s.stop_s, s.ramp_s)[0])
            if noise_mV or seal_troubles:
                v += sd * noise_rng.standard_normal(t.size)
            if hum_mV:
                v += hum_mV * np.sin(2.0 * np.pi * hum_hz * t + hum_phase)
            data[i, j:j + t.size] = v
    for a in artefacts:
        if not (0 <= a.sweep < n_sweeps):
            raise ValueError(f"an artefact in sweep {a.sweep}, but there are {n_sweeps} sweeps")
        i0 = int(round(a.t_s * fs_hz))
        data[a.sweep, max(i0, 0):min(i0 + a.n_samples, n_samples)] += a.amplitude_mV
    data.setflags(write=False)

    recording = _recording(data, fs_hz, starts, cell, seed)
    return Synthetic(recording, train, cell, starts, duration_s, planted, artefacts, pauses, seal_troubles)


def _recording(data: np.ndarray, fs_hz: float, starts: Sequence[float], cell: CellParams, seed: int) -> Recording:
    """A Recording over the generated samples without copying them (long recordings are large)."""

    def loader(sweep: int, channel: int, start: int, stop: int) -> np.ndarray:
        return data[sweep, start:stop].copy()

    return Recording(
        channels=[Channel("Vm", "mV", CURRENT_CLAMP)], sampling_rate_hz=fs_hz,
        sweep_lengths=[data.shape[1]] * data.shape[0], sweep_starts_s=list(starts), loader=loader,
        format="array", metadata={"generator": "analysis.synthetic._cells", "cell": cell.name, "seed": int(seed)},
    )
