"""A small study for the window's tests: three synthetic nodal-like cells, each under a baseline
and a rate-slowing condition, analysed into one results file with the study's layout."""

from __future__ import annotations

from pathlib import Path

from analysis.results import write_study
from analysis.session import Session
from analysis.study import StudyLayout
from analysis.synthetic import preset, synthesize, write_abf

CELLS = ("NL-0601", "NL-0602", "NL-0603")
CONDITIONS = ("baseline", "UP-113")
#: Cycle length (ms) of each cell under each condition: the condition slows every cell.
CL_MS = {("NL-0601", "baseline"): 700.0, ("NL-0601", "UP-113"): 900.0,
         ("NL-0602", "baseline"): 800.0, ("NL-0602", "UP-113"): 950.0,
         ("NL-0603", "baseline"): 760.0, ("NL-0603", "UP-113"): 1000.0}


def make_study(folder: Path) -> tuple[Path, StudyLayout]:
    """Write the recordings under ``folder/CELL/CONDITION.abf``, analyse them into
    ``folder/study.h5`` and store the layout; returns the results file and the layout."""
    for i, ((cell, cond), cl) in enumerate(CL_MS.items()):
        syn = synthesize(preset("nodal-like", cl_ms=cl, cl_sd_ms=0.0), duration_s=8.0, fs_hz=4_000.0,
                         seed=60 + i, noise_mV=0.1)
        (folder / cell).mkdir(parents=True, exist_ok=True)
        write_abf(syn.recording, folder / cell / f"{cond}.abf")
    layout = StudyLayout.from_pattern(folder, "{cell}/{condition}.abf", condition_order=CONDITIONS)
    session = Session()
    for path in layout.paths():
        session.add(path)
    results = folder / "study.h5"
    session.save(results)
    write_study(results, layout)
    return results, layout
