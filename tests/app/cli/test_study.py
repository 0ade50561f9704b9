"""A study end to end on the real recordings of ../shared/real-ipsc: batch with a pattern or a
sheet, the per cell x condition table, the comparison and its figures, and the study reopened.

The recordings and their layout (folders ``<cell>_<compound>``, files ``<condition>_spont.csv``)
are described in that folder's README (Clark AP et al., Europace 2023;25(9):euad243). The paired
tests are checked against scipy.stats on the same numbers.
"""

from __future__ import annotations

import csv
import math

import numpy as np
import pytest
import scipy.stats

from analysis.results import read_study
from analysis.study import StudyLayout
from app.cli import main
from app.svg.study import COMPARISON_PANELS

pytestmark = [pytest.mark.realdata, pytest.mark.slow]
PATTERN = "{cell}_{drug:[a-z]+}/{condition}_spont.csv"
ORDER = "Pre-drug,Post-drug,Washoff"


def _rows(path):
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def _num(text):
    return float(text) if text else math.nan


@pytest.fixture(scope="module")
def by_pattern(real_ipsc_dir, tmp_path_factory):
    out = tmp_path_factory.mktemp("study")
    code = main(["batch", str(real_ipsc_dir), "--out", str(out / "study.h5"), "--layout", PATTERN,
                 "--condition-order", ORDER, "--group-from", "drug", "--study-csv", str(out / "cells.csv"),
                 "--compare", str(out / "compare.csv"), "--workers", "1", "--quiet"])
    assert code == 0
    return out


def test_one_summary_row_per_cell_and_condition_present(by_pattern, real_ipsc_dir):
    rows = _rows(by_pattern / "cells.csv")
    files = sorted(p.relative_to(real_ipsc_dir).as_posix() for p in real_ipsc_dir.glob("*/*.csv"))
    assert sorted(r["files"] for r in rows) == files  # one row per file: one file per cell x condition
    assert [r["condition"] for r in rows if r["cell"] == "7_042121_1_alex"] == ["Pre-drug", "Post-drug", "Washoff"]
    assert {r["group"] for r in rows} == {"control", "cisapride", "verapamil", "quinidine", "quinine"}
    # The README: the quinine cell beats 12 times before the compound and not at all after it.
    quinine = {r["condition"]: r for r in rows if r["cell"] == "7_042121_1_alex"}
    assert int(quinine["Pre-drug"]["n_beats"]) == 12 and int(quinine["Post-drug"]["n_beats"]) == 0


def test_the_comparison_is_the_difference_of_the_summary_rows_and_matches_scipy(by_pattern):
    cells = {(r["cell"], r["condition"]): r for r in _rows(by_pattern / "cells.csv")}
    comp = _rows(by_pattern / "compare.csv")
    checked = 0
    for r in comp:
        if r["row"] != "cell":
            continue
        column = f"{r['parameter']}_mean_{r['unit']}"
        base = _num(cells[(r["cell"], r["baseline"])][column])
        value = _num(cells[(r["cell"], r["condition"])][column])
        assert _num(r["difference"]) == pytest.approx(value - base, abs=1e-6)  # 10 significant digits in CSV
        checked += 1
    assert checked > 20
    # The control group has two cells with beats before and after: scipy.stats on their values.
    (g,) = [r for r in comp if r["row"] == "group" and r["group"] == "control" and r["parameter"] == "apd90"]
    base = np.array([_num(cells[(c, "Pre-drug")]["apd90_mean_ms"]) for c in ("4_021921_1_alex", "4_021921_2_alex")])
    post = np.array([_num(cells[(c, "Post-drug")]["apd90_mean_ms"]) for c in ("4_021921_1_alex", "4_021921_2_alex")])
    t = scipy.stats.ttest_rel(post, base)
    w = scipy.stats.wilcoxon(post, base)
    assert int(g["n"]) == 2
    assert _num(g["paired_t_p"]) == pytest.approx(t.pvalue, rel=1e-5)
    assert _num(g["wilcoxon_p"]) == pytest.approx(w.pvalue, rel=1e-5)


def test_the_results_file_reopens_as_the_same_study_and_exports_the_same_tables(by_pattern, real_ipsc_dir, tmp_path):
    layout = read_study(by_pattern / "study.h5")
    expected = StudyLayout.from_pattern(real_ipsc_dir, PATTERN, condition_order=ORDER.split(","), group_from="drug")
    assert layout == expected
    code = main(["export", str(by_pattern / "study.h5"), "--study-csv", str(tmp_path / "cells.csv"),
                 "--compare", str(tmp_path / "compare.csv"), "--compare-figures", str(tmp_path / "figures")])
    assert code == 0
    assert (tmp_path / "cells.csv").read_bytes() == (by_pattern / "cells.csv").read_bytes()
    assert (tmp_path / "compare.csv").read_bytes() == (by_pattern / "compare.csv").read_bytes()
    svg = (tmp_path / "figures" / "compare-control.svg").read_text()
    png = (tmp_path / "figures" / "compare-control.png").read_bytes()
    assert png[:8] == b"\x89PNG\r\n\x1a\n"  # the PNG signature (PNG specification)
    # Two control cells: one line each per panel, and the mean line on top.
    panels = len(COMPARISON_PANELS)  # one per summarised parameter
    assert svg.count("<title>4_021921_1_alex</title>") == panels and svg.count('stroke-width="2.2"') == panels


def test_a_sheet_gives_the_same_rows_with_its_own_columns(real_ipsc_dir, tmp_path, capsys):
    lines = ["file,cell,condition,drug,operator"]
    for path in sorted(real_ipsc_dir.glob("*/*.csv")):
        if path.parent.name.startswith("5_"):
            continue  # left out of the sheet: reported, not analysed
        cell, drug = path.parent.name.rsplit("_", 1)
        # Absolute paths: the real files stay where they are (relative ones start at the sheet's folder).
        lines.append(f"{path},{cell},{path.name.split('_')[0]},{drug},AC")
    layout_sheet = tmp_path / "sheet.csv"
    layout_sheet.write_text("\n".join(lines) + "\n")
    out = tmp_path / "study.h5"
    code = main(["batch", str(real_ipsc_dir), "--out", str(out), "--sheet", str(layout_sheet),
                 "--condition-order", ORDER, "--group-from", "drug", "--study-csv", str(tmp_path / "cells.csv"),
                 "--workers", "1", "--quiet"])
    assert code == 0
    err = capsys.readouterr().err
    assert "2 file(s) match no cell and condition" in err and "5_031521_2_alex_verapamil/Pre-drug_spont.csv" in err
    rows = _rows(tmp_path / "cells.csv")
    assert len(rows) == 11 and {r["operator"] for r in rows} == {"AC"}
    assert "verapamil" not in {r["group"] for r in rows}


def test_study_mistakes_are_one_line_and_exit_2(real_ipsc_dir, tmp_path, capsys):
    out = tmp_path / "study.h5"
    assert main(["batch", str(real_ipsc_dir), "--out", str(out), "--layout", "{cell}/x.csv"]) == 2
    assert "has no {condition}" in capsys.readouterr().err
    assert main(["batch", str(real_ipsc_dir), "--out", str(out), "--layout", PATTERN,
                 "--condition-order", "baseline,drug"]) == 2
    assert "which no file has" in capsys.readouterr().err
    assert not out.exists()  # nothing written
