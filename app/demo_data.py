"""The demo scenario: its invented recordings, where the bundled files are, and the fallback.

The scenario (invented; the cells, the compound and the values are fictional):

* cell "NL-0417", a nodal-like stem-cell-derived cardiomyocyte recorded gap-free for three
  minutes in current clamp. After a 60 s baseline the fictional rate-slowing compound "UP-113"
  (1 uM) is washed in: it flattens phase 4, so the cell slows; from 120 s it is washed out and the
  rate recovers. The recording has noise, mains hum and slow drift, three electrical artefacts
  (short spikes in diastole, one at each solution change and one in the baseline), one delayed
  afterdepolarisation, one pause and a short stretch of seal trouble, all for the review to catch;
* cell "VL-0212", a ventricular-like stem-cell-derived cardiomyocyte recorded in five consecutive
  4 s sweeps at 50 kHz (fast upstrokes need it), with one early afterdepolarisation.

:func:`gap_free_scenario` and :func:`episodic_scenario` synthesise both from
:mod:`analysis.synthetic._cells` with fixed seeds; ``sample_data/make_samples.py`` writes them to the
bundled files. :func:`demo_paths` finds those files beside the package (a source checkout, or the
``share/upstroke/sample_data`` folder an installed copy puts them in). :func:`demo_recording`
returns what ``upstroke demo`` opens: the bundled gap-free file when there is one, otherwise the
same recording synthesised in memory.
"""

from __future__ import annotations

import sys
from dataclasses import dataclass, field
from pathlib import Path

from analysis.conditions import Condition, parse_condition
from analysis.recording import Recording

__all__ = [
    "CELL_ID",
    "COMPOUND",
    "EPISODIC_CELL_ID",
    "GAP_FREE_ABF",
    "GAP_FREE_NWB",
    "EPISODIC_ABF",
    "DemoPaths",
    "demo_conditions",
    "demo_paths",
    "demo_recording",
    "episodic_scenario",
    "gap_free_scenario",
    "synthesize_demo",
]

CELL_ID = "NL-0417"
COMPOUND = "UP-113"
DURATION_S = 180.0
FS_HZ = 10_000.0
SEED = 417
#: Conditions of the scenario, in the command line's syntax (steady state: last 30 s of each).
CONDITION_TEXTS = (
    "baseline=0-60s,steady=last30s",
    f"{COMPOUND} 1 uM=60-120s,steady=last30s",
    "washout=120s-end,steady=last30s",
)
#: When the compound arrives and when the washout starts (s): the solution changes.
WASH_IN_S, WASH_OUT_S = 60.0, 120.0

EPISODIC_CELL_ID = "VL-0212"
EPISODIC_FS_HZ = 50_000.0
EPISODIC_SWEEPS = 5
EPISODIC_SWEEP_S = 4.0
EPISODIC_GAP_S = 0.0  # back to back: an ABF1 file has no inter-sweep interval as readers take it
EPISODIC_SEED = 212

GAP_FREE_ABF = f"{CELL_ID}_gapfree.abf"
GAP_FREE_NWB = f"{CELL_ID}_gapfree.nwb"
EPISODIC_ABF = f"{EPISODIC_CELL_ID}_episodic.abf"


# -- the scenario ----------------------------------------------------------------------------------
def _diastole_point(train, near_s: float, fraction: float) -> tuple[int, float]:
    """The train beat whose diastole is nearest ``near_s``, and the time ``fraction`` into it
    (rounded to 1 ms, so that the planted times read cleanly)."""
    import numpy as np

    mid = train.t_mdp_s[:-1] + 0.5 * train.t4_s
    k = int(np.argmin(np.abs(mid - near_s)))
    return k, round(float(train.t_mdp_s[k] + fraction * train.t4_s[k]), 3)


def gap_free_scenario():
    """Cell NL-0417, three minutes gap-free at 10 kHz: baseline, UP-113, washout.

    Returns
    -------
    analysis.synthetic._cells.Synthetic
        The recording and its truth (``truth.events`` holds every planted event's time).

    Notes
    -----
    The artefacts are placed in diastoles (40-45 % of the way from the MDP to the upstroke), where
    a reviewer sees them beside a quiet trace, and not on an upstroke, where they would corrupt
    dV/dt max. Their diastoles are found on the same beat train (the rhythm does not depend on the
    sampling rate, so a cheap pass at a low rate gives it).
    """
    from analysis.synthetic import DAD, Artefact, Pause, SealTrouble, Stretch, preset, synthesize

    cell = preset("nodal-like")
    common = dict(
        duration_s=DURATION_S, seed=SEED, noise_mV=0.3, hum_mV=0.4, hum_hz=50.0, drift_mV_per_min=0.8,
        # UP-113 flattens phase 4 to 55 % between wash-in and washout, ramping over 15 s.
        stretches=[Stretch(WASH_IN_S, WASH_OUT_S, phase4_factor=0.55, ramp_s=15.0)],
        dads=[DAD(30, amplitude_mV=4.0)],
        pauses=[Pause(150, factor=2.5)],
        seal_troubles=[SealTrouble(158.0, 163.0, depolarisation_mV=12.0, noise_mV=1.5)],
    )
    train = synthesize(cell, fs_hz=50.0, **common).train
    # A spike of half a millisecond: a click on the rig in the baseline and one at each solution
    # change (valves switching), each in a diastole.
    artefacts = [
        Artefact(_diastole_point(train, 37.0, 0.45)[1], amplitude_mV=45.0, n_samples=5),
        Artefact(_diastole_point(train, WASH_IN_S + 0.5, 0.4)[1], amplitude_mV=55.0, n_samples=5),
        Artefact(_diastole_point(train, WASH_OUT_S + 0.5, 0.4)[1], amplitude_mV=55.0, n_samples=5),
    ]
    return synthesize(cell, fs_hz=FS_HZ, artefacts=artefacts, **common)


def episodic_scenario():
    """Cell VL-0212: five consecutive 4 s sweeps at 50 kHz, with one EAD in sweep 2.

    Returns
    -------
    analysis.synthetic._cells.Synthetic
    """
    import numpy as np

    from analysis.synthetic import EAD, preset, synthesize

    cell = preset("ventricular-like")
    common = dict(
        duration_s=EPISODIC_SWEEP_S, seed=EPISODIC_SEED, n_sweeps=EPISODIC_SWEEPS, sweep_gap_s=EPISODIC_GAP_S,
        noise_mV=0.25, hum_mV=0.3, hum_hz=50.0, drift_mV_per_min=0.3,
    )
    train = synthesize(cell, fs_hz=50.0, **common).train
    # The EAD goes on the second beat of sweep 2 (a beat with a diastole before it).
    t2 = 2 * (EPISODIC_SWEEP_S + EPISODIC_GAP_S)
    in_sweep = np.flatnonzero((train.t_up_s > t2 + 0.05) & (train.t_up_s < t2 + EPISODIC_SWEEP_S - 0.6))
    return synthesize(
        cell, fs_hz=EPISODIC_FS_HZ,
        eads=[EAD(int(in_sweep[1]), amplitude_mV=6.0, at_repolarisation=0.55)], **common,
    )


def synthesize_demo() -> Recording:
    """The scenario's gap-free recording, synthesised in memory (a few seconds of work)."""
    rec = gap_free_scenario().recording
    return Recording.from_array(
        rec.sweep(0), rec.sampling_rate_hz, units=rec.units(0), channel_names=[rec.channels[0].name],
        metadata={"cell_id": CELL_ID, "compound": COMPOUND, "made_by": "app.demo_data.synthesize_demo"},
        source_path=None,
    )


# -- the bundled files ------------------------------------------------------------------------------
@dataclass(frozen=True)
class DemoPaths:
    """The bundled demo files found (None where absent) and the scenario's conditions."""

    folder: Path | None
    gap_free: Path | None = None
    episodic: Path | None = None
    nwb: Path | None = None
    conditions: tuple[Condition, ...] = field(default_factory=tuple)

    @property
    def found(self) -> bool:
        return self.gap_free is not None or self.nwb is not None


def _candidate_folders() -> list[Path]:
    import site

    here = Path(__file__).resolve().parent
    share = Path("share") / "upstroke" / "sample_data"
    # A source checkout or editable install; a copy inside the package; a non-editable install's
    # data files (pyproject.toml puts them in share/upstroke/sample_data under the prefix, or
    # under the user base for ``pip install --user``).
    return [here.parent / "sample_data", here / "sample_data", Path(sys.prefix) / share, Path(site.getuserbase()) / share]


def demo_conditions(folder: Path | None = None) -> tuple[Condition, ...]:
    """The scenario's conditions: from ``conditions.txt`` in the sample folder (one
    ``NAME=START-END[,steady=RULE]`` per line) when there is one, else :data:`CONDITION_TEXTS`."""
    if folder is not None and (folder / "conditions.txt").is_file():
        lines = (folder / "conditions.txt").read_text(encoding="utf-8").splitlines()
        texts = [ln.strip() for ln in lines if ln.strip() and not ln.lstrip().startswith("#")]
    else:
        texts = list(CONDITION_TEXTS)
    return tuple(parse_condition(t) for t in texts)


def demo_paths() -> DemoPaths:
    """Look for the bundled demo recordings in ``sample_data/`` beside the package.

    The gap-free recording is :data:`GAP_FREE_ABF`, else the ``.abf`` whose name says gap-free
    (``gapfree``, ``gap_free`` or ``gap-free``), else the largest ``.abf``; the episodic one is
    :data:`EPISODIC_ABF`, else another ``.abf``; the NWB copy is :data:`GAP_FREE_NWB`, else the
    first ``.nwb``.
    """
    for folder in _candidate_folders():
        if not folder.is_dir():
            continue
        abfs = sorted(folder.glob("*.abf"))
        nwbs = sorted(folder.glob("*.nwb"))
        if not abfs and not nwbs:
            continue
        named = [p for p in abfs if p.name == GAP_FREE_ABF] or [
            p for p in abfs if any(k in p.name.lower() for k in ("gapfree", "gap_free", "gap-free"))
        ]
        gap_free = named[0] if named else (max(abfs, key=lambda p: p.stat().st_size) if abfs else None)
        others = [p for p in abfs if p != gap_free]
        episodic = next((p for p in others if p.name == EPISODIC_ABF), others[0] if others else None)
        nwb = next((p for p in nwbs if p.name == GAP_FREE_NWB), nwbs[0] if nwbs else None)
        return DemoPaths(folder, gap_free, episodic, nwb, demo_conditions(folder))
    return DemoPaths(None, conditions=demo_conditions(None))


def demo_recording() -> tuple[Recording | Path, tuple[Condition, ...], str]:
    """What ``upstroke demo`` opens: ``(recording or its path, conditions, label)``."""
    paths = demo_paths()
    if paths.gap_free is not None:
        return paths.gap_free, paths.conditions, paths.gap_free.name
    if paths.nwb is not None:
        return paths.nwb, paths.conditions, paths.nwb.name
    return synthesize_demo(), paths.conditions, f"{CELL_ID} (made in memory)"
