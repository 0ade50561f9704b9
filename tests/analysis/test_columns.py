"""The catalogue of beat columns: one record per column, and everything derived from it agrees."""

from __future__ import annotations

import ast
import csv
import io
import math
import re
import sys
from pathlib import Path

import numpy as np
import pytest

from analysis import columns, docs_measurements
from analysis.beats import FEATURES, features_of_sweep
from analysis.beats._features import apd_features
from analysis.columns import CATALOGUE, column, csv_columns, summarised_columns
from analysis.settings import MeasurementSettings, Settings
from analysis.stats import PARAMETERS, SUMMARY_COLUMNS, summarize
from analysis.table import COLUMNS, CSV_COLUMNS, REVIEW_CSV_COLUMNS, BeatTable

CONTRACT = Path(__file__).resolve().parents[3] / "shared" / "CONTRACT.md"
#: The beats CSV header as CONTRACT.md ("Beats CSV") states it; used when the contract file is not
#: beside the repository.
CONTRACT_HEADER_COPY = (
    "file,sweep,beat,t_upstroke_s,accepted,flags,condition,cl_ms,rate_bpm,mdp_mV,top_mV,ddr_mV_per_s,"
    "ddr100_mV_per_s,dvdt_max_V_per_s,peak_mV,apa_mV,apd20_ms,apd50_ms,apd90_ms"
)


def _contract_header() -> list[str]:
    if not CONTRACT.is_file():
        return CONTRACT_HEADER_COPY.split(",")
    text = CONTRACT.read_text(encoding="utf-8")
    section = text.split("## Beats CSV", 1)[1]
    return re.search(r"^`(file,[^`]+)`$", section, re.M).group(1).split(",")


def test_the_csv_header_is_the_contracts():
    # Source: ../shared/CONTRACT.md, "Beats CSV": the header, in this order.
    header = _contract_header()
    assert header[:3] == ["file", "sweep", "beat"] and len(header) == 19  # the parse found the line
    assert list(CSV_COLUMNS) == header
    assert [c.name for c in csv_columns()] == header
    assert COLUMNS == csv_columns()  # the beat table declares the catalogue's CSV columns
    # The CSV writer writes exactly that header, then the review's columns (CONTRACT.md: the verdict,
    # the reason of a rejection, who decided, a stable recording identifier; names documented in
    # docs/measurements.md and kept stable).
    assert list(REVIEW_CSV_COLUMNS) == ["verdict", "reject_reason", "decided_by", "recording_id"]
    assert next(csv.reader(io.StringIO(BeatTable.empty().to_csv()))) == header + list(REVIEW_CSV_COLUMNS)


def test_the_review_columns_are_documented_with_the_beats_csv():
    page = (Path(__file__).resolve().parents[2] / "docs" / "measurements.md").read_text(encoding="utf-8")
    section = page.split("## The beats CSV's columns", 1)[1].split("\n## ", 1)[0]
    rows = [line.split("|")[1].strip().strip("`") for line in section.splitlines() if line.startswith("| `")]
    assert rows == [*CSV_COLUMNS, *REVIEW_CSV_COLUMNS]  # every column, in the CSV's order


def test_every_measured_column_has_exactly_one_compute_function_and_every_function_a_column():
    # The registry holds the algorithm, the catalogue everything said about the column.
    defaults = MeasurementSettings()
    registry = [*FEATURES, *(f.name for f in apd_features(defaults.apd_percent))]
    assert len(registry) == len(set(registry))
    measured = [c.name for c in CATALOGUE if c.kind == "measured"]
    assert sorted(registry) == sorted(measured)
    for name, feature in FEATURES.items():
        assert feature.column is column(name)
        assert (feature.name, feature.unit, feature.description, feature.source) == (
            name, column(name).unit, column(name).description, column(name).source)
    # Any APD percentage the settings ask for has its column in the catalogue.
    (f,) = apd_features([12.5])
    assert f.name == "apd12p5_ms" and f.column == column("apd12p5_ms") and f.unit == "ms"
    assert column("t_apd12p5_s").kind == "marker"


def test_each_compute_function_computes_its_own_column():
    # MEASUREMENTS.md: cl = t_upstroke minus the previous one; rate = 60000 / cl; APA = peak - MDP;
    # APDx from t_upstroke (default reference: dV/dt max) to the x % crossing. Values by hand.
    t_up = np.array([0.1, 0.9, 1.7])
    nan = math.nan
    markers = {
        "t_upstroke_s": t_up, "t_dvdt_max_s": t_up, "has_previous": np.array([False, True, True]),
        "mdp_mV": np.array([nan, -61.0, -62.0]), "top_mV": np.array([nan, -45.0, -46.0]),
        "ddr_mV_per_s": np.array([nan, 30.0, 31.0]), "ddr100_mV_per_s": np.array([nan, 40.0, 41.0]),
        "dvdt_max_V_per_s": np.array([5.0, 6.0, 7.0]), "peak_mV": np.array([15.0, 16.0, 17.0]),
        "t_top_s": t_up - 0.01, "t_peak_s": t_up + 0.01,
        **{f"t_apd{p}_s": t_up + p / 1000.0 for p in (20, 50, 90)},
    }
    out = features_of_sweep(markers, MeasurementSettings())
    assert set(out) == {c.name for c in CATALOGUE if c.kind == "measured"}
    assert out["cl_ms"][1:] == pytest.approx([800.0, 800.0])
    assert out["rate_bpm"][1:] == pytest.approx([75.0, 75.0])
    assert out["apa_mV"][1:] == pytest.approx([77.0, 79.0])
    assert out["apd90_ms"][1:] == pytest.approx([90.0, 90.0])
    assert out["mdp_mV"][2] == -62.0 and out["dvdt_max_V_per_s"][0] == 5.0
    assert math.isnan(out["cl_ms"][0]) and math.isnan(out["apd20_ms"][0])  # no diastole before it


def test_names_units_and_labels_hang_together():
    # Common practice, no source: a column's name ends with its unit; labels and descriptions are
    # given once for every column.
    for c in CATALOGUE:
        assert c.kind in columns.KINDS and c.label and c.description, c.name
        if c.unit:
            assert c.name == f"{c.stem}_{c.unit_in_name}"
            assert c.header == f"{c.label}\n({c.unit})" and c.axis_label == f"{c.label} ({c.unit})"
        assert (c.decimals is not None) == (c.in_csv and c.dtype == "float"), c.name
    assert column("ddr_mV_per_s").unit_in_name == "mV_per_s" and column("ddr_mV_per_s").stem == "ddr"
    with pytest.raises(KeyError):
        column("no_such_column")
    with pytest.raises(ValueError):
        columns.BeatColumn("peak_mV", "measured", "float", unit="ms")


def test_csv_decimals_are_the_catalogues():
    # CONTRACT.md: an undefined value is an empty cell; decimals as the catalogue declares them.
    row = {c.name: [1.23456789 if c.dtype == "float" else (1 if c.dtype == "int" else "x")]
           for c in (*csv_columns(), *columns.review_csv_columns())}
    row["cl_ms"] = [math.nan]
    line = BeatTable(row).to_csv().splitlines()[1].split(",")
    for c, cell in zip(csv_columns(), line):
        if c.name == "cl_ms":
            assert cell == ""
        elif c.dtype == "float":
            assert cell == f"{1.23456789:.{c.decimals}f}", c.name
    assert column("t_upstroke_s").decimals == 6 and column("apd90_ms").decimals == 3


def _summary_table(n: int = 12) -> BeatTable:
    rng = np.random.default_rng(3)
    cols: dict[str, object] = {
        "file": ["c"] * n, "sweep": [0] * n, "beat": np.arange(n), "t_upstroke_s": 0.5 + 0.8 * np.arange(n),
        "accepted": np.ones(n, int), "flags": [""] * n, "condition": [""] * n,
    }
    for c in summarised_columns():
        cols[c.name] = rng.normal(100.0, 5.0, n)
    return BeatTable(cols)


def test_summarised_columns_are_in_the_summary_output():
    # Mean and sample SD of each summarised column (numpy as the reference library).
    assert PARAMETERS == tuple((c.name, c.stem, c.unit_in_name) for c in summarised_columns())
    table = _summary_table()
    (s,) = summarize(table, label="c", sweep_starts_s=[0.0], sweep_durations_s=[20.0], settings=Settings().summary)
    for c in summarised_columns():
        mean, sd = f"{c.stem}_mean_{c.unit_in_name}", f"{c.stem}_sd_{c.unit_in_name}"
        assert mean in SUMMARY_COLUMNS and sd in SUMMARY_COLUMNS
        assert s[mean] == pytest.approx(np.mean(table[c.name])), c.name
        assert s[sd] == pytest.approx(np.std(table[c.name], ddof=1)), c.name
    not_summarised = [c for c in CATALOGUE if c.unit and not c.summarised]
    assert not_summarised and not any(f"{c.stem}_mean_{c.unit_in_name}" in SUMMARY_COLUMNS for c in not_summarised)


def test_the_measurements_page_gives_each_csv_column_its_one_description():
    page = docs_measurements.render()
    for c in csv_columns():
        row = next(line for line in page.splitlines() if line.startswith(f"| `{c.name}` |"))
        assert c.description.replace("|", "\\|") in row and row.rstrip().endswith(f"| {c.source} |")


def test_the_catalogue_imports_nothing_of_the_core_but_its_errors():
    # DESIGN.md's layers: a vocabulary module sits below every tier.
    tree = ast.parse(Path(columns.__file__).read_text(encoding="utf-8"))
    imported = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            imported |= {a.name.split(".")[0] if not a.name.startswith("analysis") else a.name for a in node.names}
        elif isinstance(node, ast.ImportFrom):
            imported.add(node.module if node.module.startswith("analysis") else node.module.split(".")[0])
    allowed = set(sys.stdlib_module_names) | {"numpy", "analysis.errors"}
    assert imported and imported <= allowed, imported - allowed
