"""The study layout: from a path pattern, from a sheet, and stored in the results file."""

from __future__ import annotations

import h5py
import numpy as np
import pytest

from analysis.results import read_study, save_results, write_study
from analysis.study import StudyError, StudyLayout


def _touch(root, *names):
    for name in names:
        path = root / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text("time_s,Vm_mV\n")


@pytest.fixture
def study(tmp_path):
    _touch(tmp_path, "NL-S01_up113/baseline.csv", "NL-S01_up113/UP-113.csv", "NL-S01_up113/washout.csv",
           "NL-S02_vehicle/baseline.csv", "NL-S02_vehicle/UP-113.csv", "notes/readme.txt", "NL-S02_vehicle/x.abf")
    return tmp_path


def test_a_pattern_assigns_cell_condition_and_group_and_reports_the_rest(study):
    layout = StudyLayout.from_pattern(
        study, "{cell}_{drug:[a-z0-9]+}/{condition}.csv", condition_order=["baseline", "UP-113", "washout"],
        group_from="drug",
    )
    assert [(e.cell, e.condition, e.group) for e in layout.entries] == [
        ("NL-S01", "UP-113", "up113"), ("NL-S01", "baseline", "up113"), ("NL-S01", "washout", "up113"),
        ("NL-S02", "UP-113", "vehicle"), ("NL-S02", "baseline", "vehicle"),
    ]
    assert layout.conditions == ("baseline", "UP-113", "washout") and layout.baseline == "baseline"
    assert layout.extra_columns == ("drug",)
    # Files that match nothing are listed, never guessed (common practice, no source).
    assert layout.unmatched == ("NL-S02_vehicle/x.abf", "notes/readme.txt")
    assert layout.cells == ("NL-S01", "NL-S02")
    assert layout.entry_for(study / "NL-S02_vehicle" / "baseline.csv").group == "vehicle"


def test_without_an_order_conditions_keep_their_first_appearance(study):
    layout = StudyLayout.from_pattern(study, "{cell}_*/{condition}.csv")
    assert layout.conditions == ("UP-113", "baseline", "washout")
    assert layout.groups == ("",)


@pytest.mark.parametrize("pattern, problem", [
    ("{cell}/x.csv", "has no {condition}"),
    ("{cell}/{condition}.nwb", "no file matches"),
    ("{cell}/{condition:[}.csv", "is not valid"),
    ("{cell}_{cell}/{condition}.csv", "twice"),
])
def test_bad_patterns_are_refused_in_one_line(study, pattern, problem):
    with pytest.raises(StudyError, match=problem.replace("{", r"\{").replace("}", r"\}")):
        StudyLayout.from_pattern(study, pattern)


def test_a_condition_order_must_name_the_files_conditions(study):
    with pytest.raises(StudyError, match="'drug', which no file has"):
        StudyLayout.from_pattern(study, "{cell}_*/{condition}.csv", condition_order=["baseline", "drug"])
    with pytest.raises(StudyError, match="leaves out 'washout'"):
        StudyLayout.from_pattern(study, "{cell}_*/{condition}.csv", condition_order=["baseline", "UP-113"])


def test_a_sheet_carries_its_own_columns(study):
    sheet = study / "sheet.csv"
    sheet.write_text(
        "file,cell,condition,group,concentration_uM,date\n"
        "NL-S01_up113/baseline.csv,NL-S01,baseline,UP-113,0,2026-03-02\n"
        "NL-S01_up113/UP-113.csv,NL-S01,drug,UP-113,1,2026-03-02\n"
        "NL-S02_vehicle/baseline.csv,NL-S02,baseline,vehicle,0,2026-03-04\n"
    )
    found = [study / "NL-S01_up113/baseline.csv", study / "NL-S01_up113/washout.csv"]
    layout = StudyLayout.from_sheet(sheet, condition_order=["baseline", "drug"], files=found)
    assert layout.extra_columns == ("concentration_uM", "date")
    assert [e.value("concentration_uM") for e in layout.entries] == ["0", "1", "0"]  # the sheet's order
    assert StudyLayout.from_sheet(sheet).conditions == ("baseline", "drug")
    assert layout.group_column == "group" and layout.groups == ("UP-113", "vehicle")
    assert layout.unmatched == ("NL-S01_up113/washout.csv",)


@pytest.mark.parametrize("text, problem", [
    ("file,cell\nNL-S01_up113/baseline.csv,NL-S01\n", "no column 'condition'"),
    ("file,cell,condition\nNL-S01_up113/nothere.csv,NL-S01,baseline\n", "do not exist"),
    ("file,cell,condition\nNL-S01_up113/baseline.csv,,baseline\n", "line 2 has no cell"),
    ("file,cell,condition\nNL-S01_up113/baseline.csv,a,b\nNL-S01_up113/baseline.csv,a,c\n", "again"),
    ("file,cell,condition\n", "lists no files"),
])
def test_bad_sheets_are_refused_naming_the_line(study, text, problem):
    sheet = study / "sheet.csv"
    sheet.write_text(text)
    with pytest.raises(StudyError, match=problem):
        StudyLayout.from_sheet(sheet)


def test_the_results_file_reopens_as_the_same_study(study, tmp_path):
    layout = StudyLayout.from_pattern(study, "{cell}_{drug:[a-z0-9]+}/{condition}.csv", group_from="drug")
    out = tmp_path / "study.h5"
    save_results(out, [])
    assert read_study(out) is None
    write_study(out, layout)
    assert read_study(out) == layout
    # The layout is plain strings, readable with h5py alone (the documented layout).
    with h5py.File(out, "r") as f:
        assert list(f["study/cell"].asstr()[()]) == [e.cell for e in layout.entries]
        assert list(f["study/extra/drug"].asstr()[()]) == [e.value("drug") for e in layout.entries]
        assert f["index"] is not None  # the recordings' index beside the study
    write_study(out, layout.with_root(study / "elsewhere"))
    assert read_study(out).root == str(study / "elsewhere") or read_study(out).root == str(study)
    np.testing.assert_equal(len(read_study(out).entries), 5)


def test_saving_the_results_again_keeps_the_study(study, tmp_path):
    # The app and `upstroke analyze --out` rewrite the whole file: the layout must survive.
    layout = StudyLayout.from_pattern(study, "{cell}_*/{condition}.csv")
    out = tmp_path / "study.h5"
    save_results(out, [])
    write_study(out, layout)
    save_results(out, [])
    assert read_study(out) == layout
