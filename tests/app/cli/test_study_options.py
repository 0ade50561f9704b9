"""The study options refuse what they cannot do, in one line with exit status 2, writing nothing."""

from __future__ import annotations

from analysis.results import save_results
from app.cli import main
from tests.batch_recordings import beating_trace, write_text


def test_study_outputs_need_a_study(tmp_path, capsys):
    results = tmp_path / "plain.h5"
    save_results(results, [])
    assert main(["export", str(results), "--compare", str(tmp_path / "c.csv")]) == 2
    err = capsys.readouterr().err
    assert "holds no study layout" in err and "--layout" in err and len(err.strip().splitlines()) == 1
    assert not (tmp_path / "c.csv").exists()
    assert main(["batch", str(tmp_path), "--out", str(tmp_path / "o.h5"), "--study-csv", str(tmp_path / "s.csv")]) == 2
    assert "need a study" in capsys.readouterr().err


def test_a_pattern_needs_one_folder_and_a_baseline_must_be_a_condition(tmp_path, capsys):
    for cell in ("NL-S01", "NL-S02"):
        for cond in ("baseline", "UP-113"):
            v, _ = beating_trace(2.0, 10_000.0, cl_ms=400.0, seed=1)
            (tmp_path / cell).mkdir(exist_ok=True)
            write_text(tmp_path / cell / f"{cond}.csv", v, 10_000.0)
    out = tmp_path / "o.h5"
    assert main(["batch", str(tmp_path / "NL-S01"), str(tmp_path / "NL-S02"), "--out", str(out),
                 "--layout", "{cell}/{condition}.csv"]) == 2
    assert "exactly one folder" in capsys.readouterr().err
    assert main(["batch", str(tmp_path), "--out", str(out), "--layout", "{cell}/{condition}.csv",
                 "--baseline", "washout"]) == 2
    assert "'washout' is not a condition of the study" in capsys.readouterr().err
    assert main(["batch", str(tmp_path), "--out", str(out), "--condition-order", "a,b"]) == 2
    assert "--condition-order needs a study" in capsys.readouterr().err
    assert not out.exists()


def test_the_beats_csv_of_a_study_carries_cell_and_own_columns(tmp_path, capsys):
    for k, cell in enumerate(("NL-S01_up113", "NL-S02_vehicle")):
        (tmp_path / cell).mkdir()
        for j, cond in enumerate(("baseline", "UP-113")):
            v, _ = beating_trace(2.0, 10_000.0, cl_ms=400.0 + 50 * j, seed=k * 2 + j)
            write_text(tmp_path / cell / f"{cond}.csv", v, 10_000.0)
    out, beats = tmp_path / "o.h5", tmp_path / "beats.csv"
    assert main(["batch", str(tmp_path), "--out", str(out), "--csv", str(beats), "--quiet", "--workers", "1",
                 "--layout", "{cell}_{treatment}/{condition}.csv", "--group-from", "treatment",
                 "--condition-order", "baseline,UP-113"]) == 0
    header, *rows = [line.split(",") for line in beats.read_text().splitlines()]
    # CONTRACT.md: the beats CSV's own columns first, the study's after them.
    assert header[:3] == ["file", "sweep", "beat"] and header[-2:] == ["cell", "group"]
    assert {(r[header.index("cell")], r[header.index("group")], r[header.index("condition")]) for r in rows} == {
        ("NL-S01", "up113", "baseline"), ("NL-S01", "up113", "UP-113"),
        ("NL-S02", "vehicle", "baseline"), ("NL-S02", "vehicle", "UP-113")}
    again = tmp_path / "again.csv"
    assert main(["export", str(out), "--csv", str(again)]) == 0
    assert again.read_bytes() == beats.read_bytes()
