"""The demo scenario: where its bundled recordings are, and the same scenario made in memory.

The scenario (invented): cell "NL-0417", a nodal-like stem-cell-derived cardiomyocyte recorded
gap-free for three minutes in current clamp. After a 60 s baseline, the fictional rate-slowing
compound "UP-113" is washed in: it flattens phase 4, so the cell slows; from 120 s it is washed
out and the rate recovers. The recording has noise, mains hum and slow drift, three electrical
artefacts, one delayed after-depolarisation, one pause and a short stretch of seal trouble, all
for the review to catch.

:func:`demo_paths` finds the bundled files in ``sample_data/`` beside the package (a source
checkout or an installed copy). :func:`demo_recording` returns the gap-free recording: from the
bundled file when there is one, otherwise synthesised in memory from :mod:`analysis.synthetic`
with the very parameters below, so ``upstroke demo`` works even before the files exist.
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
    "DemoPaths",
    "demo_conditions",
    "demo_paths",
    "demo_recording",
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
    "washout=120-end,steady=last30s",
)


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
    here = Path(__file__).resolve().parent
    return [here.parent / "sample_data", here / "sample_data", Path(sys.prefix) / "share" / "upstroke" / "sample_data"]


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

    The gap-free recording is the ``.abf`` whose name says gap-free (``gapfree``, ``gap_free``
    or ``gap-free``), else the largest ``.abf``; the episodic one is another ``.abf``; the NWB
    copy is the first ``.nwb``.
    """
    for folder in _candidate_folders():
        if not folder.is_dir():
            continue
        abfs = sorted(folder.glob("*.abf"))
        nwbs = sorted(folder.glob("*.nwb"))
        if not abfs and not nwbs:
            continue
        named = [p for p in abfs if any(k in p.name.lower() for k in ("gapfree", "gap_free", "gap-free"))]
        gap_free = named[0] if named else (max(abfs, key=lambda p: p.stat().st_size) if abfs else None)
        others = [p for p in abfs if p != gap_free]
        return DemoPaths(folder, gap_free, others[0] if others else None, nwbs[0] if nwbs else None,
                         demo_conditions(folder))
    return DemoPaths(None, conditions=demo_conditions(None))


def synthesize_demo() -> Recording:
    """The scenario's gap-free recording, synthesised in memory (about 2 s of work)."""
    from analysis.synthetic import DAD, Artefact, Pause, SealTrouble, Stretch, preset, synthesize

    syn = synthesize(
        preset("nodal-like"),
        duration_s=DURATION_S, fs_hz=FS_HZ, seed=SEED,
        noise_mV=0.3, hum_mV=0.4, hum_hz=50.0, drift_mV_per_min=0.8,
        artefacts=[Artefact(37.2, 40.0), Artefact(101.7, -35.0), Artefact(150.05, 40.0)],
        dads=[DAD(30, amplitude_mV=4.0)],
        pauses=[Pause(150, factor=2.5)],
        # UP-113 flattens phase 4 to 55 % between 60 and 120 s, ramping in and out over 15 s.
        stretches=[Stretch(60.0, 120.0, phase4_factor=0.55, ramp_s=15.0)],
        seal_troubles=[SealTrouble(158.0, 163.0, depolarisation_mV=8.0, noise_mV=1.0)],
    )
    rec = syn.recording
    data = rec.sweep(0)
    return Recording.from_array(
        data, rec.sampling_rate_hz, units=rec.units(0), channel_names=[rec.channels[0].name],
        metadata={"cell_id": CELL_ID, "compound": COMPOUND, "made_by": "app.demo_data.synthesize_demo"},
        source_path=None,
    )


def demo_recording() -> tuple[Recording | Path, tuple[Condition, ...], str]:
    """What ``upstroke demo`` opens: ``(recording or its path, conditions, label)``."""
    paths = demo_paths()
    if paths.gap_free is not None:
        return paths.gap_free, paths.conditions, paths.gap_free.name
    if paths.nwb is not None:
        return paths.nwb, paths.conditions, paths.nwb.name
    return synthesize_demo(), paths.conditions, f"{CELL_ID} (made in memory)"
