"""The demo's small invented study: five fictional cells under baseline, UP-113 and washout.

The scenario (invented; the cells, the compound and every value are fictional): five nodal-like
stem-cell-derived cardiomyocytes, NL-S01 to NL-S05, each recorded for 12 s gap-free in current
clamp three times: at baseline, after wash-in of the fictional rate-slowing compound UP-113
(1 uM, which flattens phase 4 so that each cell slows, by a different amount) and after washout
(a partial recovery). Cells differ in their rate, MDP and APD; NL-S04 has one electrical
artefact in its UP-113 recording for the review to catch. The sheet (``sheet.csv``) gives each
file's cell, condition and group (the compound) and two columns of the lab's own
(``concentration_uM``, ``recorded_on``).

:func:`study_recordings` synthesises them from :mod:`analysis.synthetic` with fixed seeds;
:func:`write_demo_study` writes the ABF files and the sheet (``sample_data/study/make_study.py``
calls it); :func:`demo_study_paths` finds the bundled folder and its sheet.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass
from pathlib import Path

__all__ = [
    "CELLS", "CONDITIONS", "DURATION_S", "FS_HZ", "STUDY_FOLDER", "StudyCell", "demo_study_paths",
    "sheet_text", "study_recordings", "write_demo_study",
]

COMPOUND = "UP-113"
#: The study's conditions in order, baseline first.
CONDITIONS = ("baseline", COMPOUND, "washout")
DURATION_S = 12.0
FS_HZ = 5_000.0
STUDY_FOLDER = "study"
SHEET = "sheet.csv"


@dataclass(frozen=True)
class StudyCell:
    """One fictional cell: its own rhythm and shape, and how strongly UP-113 acts on it."""

    cell: str
    cl_ms: float
    mdp_mV: float
    apd90_ms: float
    phase4_drug: float  # phase-4 slope under UP-113, relative to baseline
    phase4_washout: float
    recorded_on: str
    seed: int


CELLS: tuple[StudyCell, ...] = (
    StudyCell("NL-S01", 520.0, -61.0, 160.0, 0.55, 0.90, "2026-03-02", 101),
    StudyCell("NL-S02", 610.0, -63.5, 172.0, 0.62, 0.95, "2026-03-02", 102),
    StudyCell("NL-S03", 470.0, -58.5, 151.0, 0.50, 0.85, "2026-03-04", 103),
    StudyCell("NL-S04", 700.0, -64.0, 180.0, 0.70, 0.92, "2026-03-05", 104),
    StudyCell("NL-S05", 560.0, -60.0, 165.0, 0.58, 0.97, "2026-03-05", 105),
)


def _file(cell: str, condition: str) -> str:
    return f"{cell}/{cell}_{condition}.abf"


def study_recordings():
    """Every file of the study: ``[(relative path, cell, condition, Recording)]``, in sheet order."""
    from analysis.synthetic import Artefact, Stretch, preset, synthesize

    out = []
    for k, c in enumerate(CELLS):
        cell = preset("nodal-like", cl_ms=c.cl_ms, mdp_mV=c.mdp_mV, apd90_ms=c.apd90_ms)
        for j, condition in enumerate(CONDITIONS):
            factor = {0: 1.0, 1: c.phase4_drug, 2: c.phase4_washout}[j]
            stretches = [Stretch(-1.0, DURATION_S + 1.0, phase4_factor=factor, ramp_s=0.1)] if factor != 1.0 else []
            artefacts = [Artefact(7.311, amplitude_mV=50.0, n_samples=3)] if (k, j) == (3, 1) else []
            syn = synthesize(cell, duration_s=DURATION_S, fs_hz=FS_HZ, seed=c.seed * 10 + j, noise_mV=0.3,
                             hum_mV=0.2, drift_mV_per_min=0.5, stretches=stretches, artefacts=artefacts)
            out.append((_file(c.cell, condition), c.cell, condition, syn.recording))
    return out


def sheet_text() -> str:
    """The study's sheet: file, cell, condition, group and the lab's own columns."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["file", "cell", "condition", "group", "concentration_uM", "recorded_on"])
    for c in CELLS:
        for condition in CONDITIONS:
            writer.writerow([_file(c.cell, condition), c.cell, condition, COMPOUND,
                             "1" if condition == COMPOUND else "0", c.recorded_on])
    return buffer.getvalue()


def write_demo_study(folder: str | Path) -> list[Path]:
    """Write the study's ABF files and its sheet into ``folder``; the paths written."""
    from analysis.results import write_text_atomic
    from analysis.synthetic import write_abf

    root = Path(folder)
    written = []
    for rel, _, _, rec in study_recordings():
        path = root / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        write_abf(rec, path)
        written.append(path)
    write_text_atomic(root / SHEET, sheet_text())
    written.append(root / SHEET)
    return written


def demo_study_paths() -> tuple[Path, Path] | None:
    """The bundled study's folder and sheet, or None when they are not installed."""
    from app.demo_data import demo_paths

    paths = demo_paths()
    if paths.folder is None:
        return None
    folder = paths.folder / STUDY_FOLDER
    sheet = folder / SHEET
    return (folder, sheet) if sheet.is_file() else None
