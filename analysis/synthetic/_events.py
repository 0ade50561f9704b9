"""What a synthetic recording has planted in it besides the cell, and the table of where it went.

Artefacts, DADs, EADs, pauses, stretches of a rate-changing drug and of seal trouble are declared
here; :func:`plant_events` places DADs and EADs on the solved beat train and
:func:`event_table` gives every planted event's true time for :class:`~analysis.synthetic.Truth`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from analysis.synthetic._model import BeatTrain, _Events, smooth_window
from analysis.table import BeatTable

__all__ = ["Artefact", "DAD", "EAD", "Pause", "SealTrouble", "Stretch", "event_table", "plant_events", "stretch_factors"]


@dataclass(frozen=True)
class Artefact:
    """An electrical spike of a few samples, added to the recording (not to the cell).

    ``t_s`` is on the recording's clock (sweep ``sweep``'s own time).
    """

    t_s: float
    amplitude_mV: float = 40.0
    n_samples: int = 3
    sweep: int = 0


@dataclass(frozen=True)
class DAD:
    """A sub-threshold depolarisation in the diastole that follows beat ``beat``.

    It starts ``at_fraction`` of the way through that diastole, rises by ``amplitude_mV`` over
    ``rise_ms`` and falls back over ``fall_ms``. Beats count from the recording's first upstroke.
    """

    beat: int
    amplitude_mV: float = 3.0
    at_fraction: float = 0.3
    rise_ms: float = 40.0
    fall_ms: float = 80.0


@dataclass(frozen=True)
class EAD:
    """An early afterdepolarisation in beat ``beat``'s repolarisation.

    It takes off when ``at_repolarisation`` of the amplitude has repolarised and rises by
    ``amplitude_mV`` (over at most ``rise_ms``, shorter when repolarisation is fast so that
    dV/dt really turns positive) before falling back over ``fall_ms``. The beat's repolarisation
    is slowed so that, EAD aside, its APD90 is ``prolong_ms`` longer.
    """

    beat: int
    amplitude_mV: float = 6.0
    at_repolarisation: float = 0.3
    rise_ms: float = 20.0
    fall_ms: float = 40.0
    prolong_ms: float = 40.0


@dataclass(frozen=True)
class Pause:
    """Beat ``beat`` comes ``factor`` times later than its cycle length would say."""

    beat: int
    factor: float = 2.5


@dataclass(frozen=True)
class Stretch:
    """A stretch of time in which phase 4 is steeper or flatter and APD longer or shorter.

    ``phase4_factor`` < 1 flattens phase 4 (a rate-slowing drug's wash-in); the change ramps in
    and out over ``ramp_s`` with smooth edges.
    """

    start_s: float
    stop_s: float
    phase4_factor: float = 1.0
    apd_factor: float = 1.0
    ramp_s: float = 5.0


@dataclass(frozen=True)
class SealTrouble:
    """A stretch of leaky seal: a shunt that depolarises the MDP by ``depolarisation_mV`` (and
    pulls every voltage toward 0 mV by the same fraction), plus extra noise of ``noise_mV`` rms."""

    start_s: float
    stop_s: float
    depolarisation_mV: float = 8.0
    noise_mV: float = 1.0
    ramp_s: float = 0.5


def stretch_factors(stretches: Sequence[Stretch], t_s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    phase4 = np.ones_like(t_s)
    apd = np.ones_like(t_s)
    for s in stretches:
        window = smooth_window(t_s, s.start_s, s.stop_s, s.ramp_s)[0]
        phase4 *= 1.0 + (s.phase4_factor - 1.0) * window
        apd *= 1.0 + (s.apd_factor - 1.0) * window
    return phase4, apd


def plant_events(train: BeatTrain, dads: Sequence[DAD], eads: Sequence[EAD]) -> list[tuple]:
    """Place DADs and EADs on the solved train; returns (kind, beat, start, split, stop, amplitude)."""
    planted = []
    for d in dads:
        k = d.beat + 1
        if not (0 < k < train.n):
            raise ValueError(f"no diastole after beat {d.beat} in this train")
        start = train.t_mdp_s[k] + d.at_fraction * train.t4_s[k]
        split = start + d.rise_ms / 1000.0
        stop = split + d.fall_ms / 1000.0
        foot = train.t_up_s[k] - 20.0 * train.w_s[k] - (3.0 * train.w2_s if train.h2_mV else 0.0)
        if stop > foot:
            raise ValueError(f"the DAD after beat {d.beat} runs into the next upstroke: start it earlier or shorten it")
        base = train.cell_voltage(np.array([split]), derivative=False)[0][0]
        if base + d.amplitude_mV >= train.top_mV[k] - 1.0:
            raise ValueError(f"the DAD after beat {d.beat} would reach take-off: make it smaller")
        planted.append(("dad", d.beat, start, split, stop, d.amplitude_mV))
    for e in eads:
        k = e.beat
        if not (0 <= k < train.n):
            raise ValueError(f"no beat {e.beat} in this train")
        apa = train.peak_mV[k] - train.mdp_mV[k]
        if not (0.0 < e.amplitude_mV < e.at_repolarisation * apa):
            raise ValueError(f"the EAD of beat {e.beat} must be smaller than the repolarisation before it")
        fall_total = train.peak_mV[k] - train.mdp_mV[k + 1]
        remaining = (train.peak_mV[k] - e.at_repolarisation * apa - train.mdp_mV[k + 1]) / fall_total
        start = train.t_peak_s[k] + float(train.shape.first_reach(np.array([remaining]))[0]) * train.d_s[k]
        rise = e.rise_ms / 1000.0
        probe = np.linspace(start, start + rise, 201)
        steepest = np.abs(train.cell_voltage(probe)[1]).max()
        # The rising half of the EAD must outpace repolarisation for dV/dt to turn positive.
        rise = min(rise, e.amplitude_mV / (1.2 * steepest)) if steepest > 0 else rise
        room = train.t_mdp_s[k + 1] - (start + rise)
        fall = min(e.fall_ms / 1000.0, 0.8 * room)
        if fall <= 0:
            raise ValueError(f"the EAD of beat {e.beat} does not fit in its repolarisation")
        planted.append(("ead", e.beat, start, start + rise, start + rise + fall, e.amplitude_mV))
    planted.sort(key=lambda p: p[2])
    for a, b in zip(planted, planted[1:]):
        if b[2] < a[4]:
            raise ValueError(f"the {a[0]} of beat {a[1]} and the {b[0]} of beat {b[1]} overlap")
    if planted:
        cols = np.array([p[2:] for p in planted], dtype=float).T
        train.events = _Events(cols[0], cols[1], cols[2], cols[3])
    return planted


def _ead_take_off(train: BeatTrain, start: float, split: float) -> float:
    """Where dV/dt turns positive in an EAD's rise (exact waveform, bisection)."""
    grid = np.linspace(start, split, 2001)
    dv = train.evaluate(grid)[1]
    i = int(np.argmax(dv > 0))
    lo, hi = grid[max(i - 1, 0)], grid[i]
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if train.evaluate(np.array([mid]))[1][0] <= 0 else (lo, mid)
    return 0.5 * (lo + hi)


def _sweep_of(t: float, starts: Sequence[float], duration_s: float) -> tuple[int, float]:
    for i, t0 in enumerate(starts):
        if t0 <= t < t0 + duration_s:
            return i, t - t0
    return -1, float("nan")


def event_table(train, planted, artefacts, pauses, seal_troubles, starts, duration_s) -> BeatTable:
    rows: list[tuple[str, int, float, float, int, float]] = []
    for kind, beat, start, split, _stop, amplitude in planted:
        t = split if kind == "dad" else _ead_take_off(train, start, split)
        sweep, t_sweep = _sweep_of(t, starts, duration_s)
        rows.append((kind, sweep, t_sweep, float("nan"), beat, amplitude))
    for a in artefacts:
        rows.append(("artefact", a.sweep, a.t_s, float("nan"), -1, a.amplitude_mV))
    for p in pauses:
        sweep, t_sweep = _sweep_of(float(train.t_up_s[p.beat]), starts, duration_s)
        rows.append(("pause", sweep, t_sweep, float("nan"), p.beat, float("nan")))
    for s in seal_troubles:
        rows.append(("seal", 0, s.start_s, s.stop_s, -1, s.depolarisation_mV))
    rows.sort(key=lambda r: (r[1], r[2]))
    names = ("kind", "sweep", "t_s", "stop_s", "beat", "amplitude_mV")
    if not rows:
        return BeatTable({n: np.zeros(0, dtype=object if n == "kind" else float) for n in names})
    cols = list(zip(*rows))
    return BeatTable(
        {
            "kind": np.array(cols[0], dtype=object),
            "sweep": np.array(cols[1], dtype=np.int64),
            "t_s": np.array(cols[2], dtype=float),
            "stop_s": np.array(cols[3], dtype=float),
            "beat": np.array(cols[4], dtype=np.int64),
            "amplitude_mV": np.array(cols[5], dtype=float),
        }
    )
