"""The demo's invented study (app.demo_study, sample_data/study): files, sheet, and what it shows.

Invented data: the checks here are the scenario's own construction (UP-113 flattens phase 4, so
every cell slows, and washout brings it most of the way back) and the bytes the seeded synthesis
writes.
"""

from __future__ import annotations

import csv
import tomllib
from pathlib import Path

import pytest

from analysis.study import StudyLayout
from app import demo_study
from app.cli import main

ROOT = Path(__file__).resolve().parent.parent
FOLDER = ROOT / "sample_data" / "study"


def test_the_sheet_names_every_bundled_file_and_pyproject_installs_them():
    layout = StudyLayout.from_sheet(FOLDER / "sheet.csv", condition_order=demo_study.CONDITIONS,
                                    files=sorted(FOLDER.rglob("*.abf")))
    assert layout.unmatched == () and len(layout.entries) == 15
    assert layout.cells == tuple(c.cell for c in demo_study.CELLS)
    assert layout.extra_columns == ("concentration_uM", "recorded_on")
    with open(ROOT / "pyproject.toml", "rb") as fh:
        data_files = tomllib.load(fh)["tool"]["setuptools"]["data-files"]
    shipped = {p for key, paths in data_files.items() if key.startswith("share/upstroke/sample_data/study") for p in paths}
    assert shipped == {p.relative_to(ROOT).as_posix() for p in FOLDER.rglob("*") if p.is_file()} - {
        p.relative_to(ROOT).as_posix() for p in FOLDER.rglob("__pycache__/*")}


@pytest.mark.slow
def test_the_script_writes_the_bundled_bytes_again(tmp_path):
    demo_study.write_demo_study(tmp_path)
    for path in sorted(FOLDER.rglob("*.abf")) + [FOLDER / "sheet.csv"]:
        assert (tmp_path / path.relative_to(FOLDER)).read_bytes() == path.read_bytes(), path.name


@pytest.mark.slow
def test_the_compound_slows_every_cell_and_washout_brings_it_back(tmp_path):
    out = tmp_path / "demo.h5"
    assert main(["batch", str(FOLDER), "--out", str(out), "--sheet", str(FOLDER / "sheet.csv"),
                 "--condition-order", ",".join(demo_study.CONDITIONS), "--compare", str(tmp_path / "c.csv"),
                 "--workers", "1", "--quiet"]) == 0
    with open(tmp_path / "c.csv", newline="") as fh:
        rows = [r for r in csv.DictReader(fh) if r["parameter"] == "cl"]
    drug = {r["cell"]: float(r["percent_change"]) for r in rows if r["row"] == "cell" and r["condition"] == "UP-113"}
    wash = {r["cell"]: float(r["percent_change"]) for r in rows if r["row"] == "cell" and r["condition"] == "washout"}
    assert len(drug) == 5 and all(v > 15.0 for v in drug.values())  # construction: phase 4 at 50-70 %
    assert all(0.0 <= wash[c] < drug[c] / 2 for c in drug)  # construction: phase 4 back to 85-97 %
